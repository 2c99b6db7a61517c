"""Import and ONNX export speed (prints figures; the targets of the import work are not asserted).

A PyTorch module of about 500 blocks (a stem, then 70 residual units of our own: 1×1 conv, batch
norm, ReLU, 3×3 conv, batch norm, addition, ReLU, at 32 channels on 32×32) is

- imported with torch.fx (trace + shape propagation on the meta device + mapping + motifs + Tidy):
  target ≤ 2 s;
- written to ONNX by PyTorch (not timed) and imported from that file: target ≤ 1 s;
- then the imported design is exported to ONNX and checked with onnxruntime (figure reported).

The first call in a process also pays for loading parts of torch / onnx it has not used yet; it is
shown apart from the median of the following calls.

Run: PYTHONPATH=src python benchmarks/import_speed.py
"""
from __future__ import annotations

import statistics
import tempfile
import time
import warnings
from pathlib import Path

import torch
from torch import nn

from layerloom.export.onnx_file import check_onnx, export_onnx
from layerloom.importing import import_module, import_onnx

UNITS, WIDTH, SIZE = 70, 32, 32


class Unit(nn.Module):
    def __init__(self, ch: int):
        super().__init__()
        self.squeeze = nn.Conv2d(ch, ch // 2, 1, bias=False)
        self.bn1 = nn.BatchNorm2d(ch // 2)
        self.spread = nn.Conv2d(ch // 2, ch, 3, padding=1, bias=False)
        self.bn2 = nn.BatchNorm2d(ch)

    def forward(self, x):
        y = torch.relu(self.bn1(self.squeeze(x)))
        return torch.relu(x + self.bn2(self.spread(y)))


class Stack(nn.Module):
    def __init__(self):
        super().__init__()
        self.stem = nn.Conv2d(3, WIDTH, 3, padding=1)
        self.units = nn.Sequential(*[Unit(WIDTH) for _ in range(UNITS)])
        self.fc = nn.Linear(WIDTH, 10)

    def forward(self, x):
        return self.fc(torch.flatten(self.units(self.stem(x)).mean((2, 3), keepdim=True), 1))


def timed(call, repeats: int = 5):
    """(first call's seconds, median of the next ``repeats``, last result)."""
    t = time.perf_counter()
    result = call()
    first = time.perf_counter() - t
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        result = call()
        times.append(time.perf_counter() - t)
    return first, statistics.median(times), result


def main() -> None:
    model = Stack().eval()
    shape = (3, SIZE, SIZE)
    first, median, flat = timed(lambda: import_module(model, shape, motifs=False))
    print(f"PyTorch import, flat: {len(flat.design.blocks)} blocks; first {first:.2f} s, median {median:.2f} s "
          "(trace + meta shapes + map + Tidy); target ≤ 2 s")
    first, median, imported = timed(lambda: import_module(model, shape))
    d = imported.design
    uses = sum(b.kind == "Motif" for b in d.blocks.values())
    print(f"PyTorch import with motifs: {len(d.motifs)} motif(s), {uses} use(s); first {first:.2f} s, "
          f"median {median:.2f} s; target ≤ 2 s")
    with tempfile.TemporaryDirectory() as folder:
        source = Path(folder) / "stack.onnx"
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            torch.onnx.export(model, (torch.zeros(1, *shape),), str(source), dynamo=False,
                              training=torch.onnx.TrainingMode.EVAL, do_constant_folding=False)
        first, median, from_onnx = timed(lambda: import_onnx(str(source), motifs=False))
        print(f"ONNX import, flat: {len(from_onnx.design.blocks)} blocks; first {first:.2f} s, median {median:.2f} s "
              "(check + shape inference + map + Tidy); target ≤ 1 s")
        first, median, _ = timed(lambda: import_onnx(str(source)))
        print(f"ONNX import with motifs: first {first:.2f} s, median {median:.2f} s; target ≤ 1 s")
        out = Path(folder) / "again.onnx"
        t = time.perf_counter()
        exported = export_onnx(d, out)
        middle = time.perf_counter()
        check = check_onnx(d, exported, out)
        end = time.perf_counter()
        print(f"export ONNX of the imported design: {middle - t:.2f} s; verify with onnxruntime: {end - middle:.2f} s; "
              f"{'agrees' if check.ok else 'DISAGREES'} (max difference {check.max_abs_diff:.2g})")


if __name__ == "__main__":
    main()
