"""Export of a design to an ONNX file, through its PyTorch module, and a check with onnxruntime.

The exported module (:mod:`layerloom.export.pytorch_source`) is built in eval mode and written
with ``torch.onnx.export`` (the TorchScript-based exporter, ``dynamo=False``, which needs no extra
package) keeping inference behaviour (``TrainingMode.EVAL``) without constant folding: so each batch
norm stays a BatchNormalization node with its own scale, shift and running statistics instead of
being folded into the convolution before it (which changes the weights). The file then holds the
module's parameters and buffers as they are, and :func:`check_onnx` compares

- outputs: the module in torch and the file in onnxruntime on one random input (seeded), max
  absolute difference ≤ :data:`TOLERANCE` (fp32);
- initializers: every parameter and buffer of the module is in the file under its own name with
  equal values (PyTorch's exporter stores equal tensors once and names the others with Identity
  nodes; those names count), and their elements add up to the ledger's weights + buffers less one
  per batch norm: the batch counter (``num_batches_tracked``) our ledger counts as a buffer is not
  part of an inference graph.

torch, onnx and onnxruntime are imported inside the functions only.
"""
from __future__ import annotations

import os
from dataclasses import dataclass

from layerloom.core.ledger import Ledger
from layerloom.export.pytorch_source import export
from layerloom.export.verify import load_module, refuse_placeholders

TOLERANCE = 1e-4
SEED = 20240601
COUNTER = "num_batches_tracked"


@dataclass(frozen=True)
class OnnxCheck:
    """The outcome of :func:`check_onnx`; ``ok`` when outputs agree and the initializers hold the ledger."""

    max_abs_diff: float
    file_elements: int  # elements of the module's parameters and buffers found in the file
    ledger_elements: int  # ledger weights + buffers − batch counters
    counters: int
    missing: tuple[str, ...]  # parameters or buffers absent from the file or with other values

    @property
    def ok(self) -> bool:
        return self.max_abs_diff <= TOLERANCE and not self.missing and self.file_elements == self.ledger_elements

    def text(self) -> str:
        lines = [f"outputs: max abs difference onnxruntime vs torch {self.max_abs_diff:.3g} "
                 f"({'within' if self.max_abs_diff <= TOLERANCE else 'ABOVE'} {TOLERANCE:g})",
                 f"initializers: {self.file_elements:,} elements; ledger weights + buffers less {self.counters} batch "
                 f"counter{'s' if self.counters != 1 else ''}: {self.ledger_elements:,} "
                 f"({'equal' if self.file_elements == self.ledger_elements else 'DIFFERENT'})"]
        if self.missing:
            lines.append(f"missing or different in the file: {', '.join(self.missing[:8])}"
                         + (f" and {len(self.missing) - 8} more" if len(self.missing) > 8 else ""))
        lines.append("ONNX file agrees" if self.ok else "ONNX file DISAGREES")
        return "\n".join(lines)


def export_onnx(design, path: str | os.PathLike, class_name: str | None = None):
    """Write ``design`` to the ONNX file ``path``; returns the torch module that was exported.

    Raises ExportRefused (error findings) or VerifyRefused (unmapped operations cannot run).
    """
    import warnings

    import torch

    refuse_placeholders(design)
    made = export(design, class_name)
    model = getattr(load_module(made.source), made.class_name)().eval()
    inputs = _inputs(design, torch.zeros)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the exporter's notice that a newer exporter exists
        torch.onnx.export(model, inputs, os.fspath(path), dynamo=False, training=torch.onnx.TrainingMode.EVAL,
                          do_constant_folding=False,
                          input_names=[b.name for b in design.of_kind("Input")])
    return model


def _inputs(design, make) -> tuple:
    analysis = design.analysis()
    return tuple(make(design.batch, *analysis.shape(b.id)) for b in design.of_kind("Input"))


def check_onnx(design, model, path: str | os.PathLike) -> OnnxCheck:
    """Compare the ONNX file ``path`` with ``model`` (from :func:`export_onnx`) and the ledger."""
    import numpy as np
    import onnx
    import onnxruntime
    import torch
    from onnx import numpy_helper

    generator = torch.Generator().manual_seed(SEED)
    inputs = _inputs(design, lambda *shape: torch.randn(*shape, generator=generator))
    with torch.no_grad():
        expected = model(*inputs)
    expected = expected if isinstance(expected, tuple) else (expected,)
    session = onnxruntime.InferenceSession(os.fspath(path), providers=["CPUExecutionProvider"])
    feeds = {i.name: x.numpy() for i, x in zip(session.get_inputs(), inputs)}
    got = session.run(None, feeds)
    diff = max(float(np.max(np.abs(g - e.numpy()))) for g, e in zip(got, expected))

    graph = onnx.load(os.fspath(path)).graph
    stored = {t.name: numpy_helper.to_array(t) for t in graph.initializer}
    for n in graph.node:
        if n.op_type == "Identity" and n.input[0] in stored:
            stored[n.output[0]] = stored[n.input[0]]
    state = model.state_dict()
    counters = sum(1 for k in state if k.endswith(COUNTER))
    missing, found = [], 0
    for name, tensor in state.items():
        if name.endswith(COUNTER):
            continue
        value = stored.get(name)
        if value is None or value.shape != tuple(tensor.shape) or not np.array_equal(value, tensor.numpy()):
            missing.append(name)
        else:
            found += value.size
    t = Ledger(design.analysis()).totals
    return OnnxCheck(diff, found, t.weights + t.buffers - counters, counters, tuple(missing))
