"""The command line's side of bringing networks in and taking them out as ONNX:
``layerloom import SOURCE -o design.loom`` and ``layerloom export FILE --onnx model.onnx``.

Both print one-line errors and return exit codes (0 done, 1 a check disagreed, 2 the source or an
option could not be used); the work is done by :mod:`layerloom.importing` and
:mod:`layerloom.export.onnx_file`.
"""
from __future__ import annotations

import json
import sys

from layerloom.core import units
from layerloom.core.fileformat import save
from layerloom.core.shapes import parse_shape

ONNX_MISSING = "needs the onnx and onnxruntime packages: pip install 'layerloom[onnx]'"


def add_import_parser(sub) -> None:
    """Register ``import`` on the command line's subparsers."""
    p = sub.add_parser("import", help="open a PyTorch module (FILE.py:NAME, package.module:NAME) or an ONNX file "
                       "as a design")
    p.add_argument("source", metavar="SOURCE", help="FILE.py:NAME or package.module:NAME (an nn.Module class or a "
                   "function returning one; runs that code) or MODEL.onnx")
    p.add_argument("-o", "--output", required=True, metavar="DESIGN.loom", help="the design file to write")
    p.add_argument("--input", metavar="CxHxW", help="input shape (default 3x224x224 for PyTorch; the file's for ONNX)")
    p.add_argument("--args", metavar="JSON", help="keyword arguments for NAME, as a JSON object")
    p.add_argument("--flat", action="store_true", help="no motifs: every operation a block of the design")
    p.set_defaults(run=run_import)


def run_import(args) -> int:
    from layerloom.core.ledger import Ledger  # only for this command, not at the command line's start
    from layerloom.importing import ImportFailed, import_source, runs_code

    try:
        shape = parse_shape(args.input) if args.input else None
        kwargs = json.loads(args.args) if args.args else {}
    except ValueError as e:
        return _fail(f"--input/--args: {e}")
    if not isinstance(kwargs, dict):
        return _fail(f"--args must be a JSON object such as '{{\"classes\": 10}}', not {args.args}")
    caution = runs_code(args.source)
    if caution:
        print(caution)
    try:
        imported = import_source(args.source, shape, kwargs, motifs=not args.flat)
    except ImportFailed as e:
        return _fail(str(e))
    except ModuleNotFoundError as e:
        return _fail(f"{args.source}: import {ONNX_MISSING if e.name in ('onnx', 'onnxruntime') else f'needs {e.name}'}")
    design = imported.design
    try:
        save(design, args.output)
    except OSError as e:
        return _fail(f"cannot write {args.output}: {e.strerror or e}")
    t = Ledger(design.analysis()).totals
    uses = sum(1 for b in design.blocks.values() if b.kind == "Motif")
    print(f"wrote {args.output}: {len(design.blocks)} blocks, {len(design.motifs)} motifs ({uses} uses); "
          f"{units.count(t.weights)} weights ({t.weights:,}), {units.count(t.macs)} MACs ({t.macs:,})")
    if imported.unmapped:
        print(f"{len(imported.unmapped)} unmapped operation(s), kept with their traced shape and costs "
              f"(finding import.unmapped): {', '.join(imported.unmapped[:8])}")
    for note in imported.notes:
        print(f"note: {note}")
    return 0


def export_onnx_command(design, args) -> int:
    """``export FILE --onnx MODEL.onnx [--verify]``: write the file and, with ``--verify``, check it."""
    from layerloom.export import ExportRefused, VerifyRefused
    from layerloom.export.onnx_file import check_onnx, export_onnx

    try:
        model = export_onnx(design, args.onnx, args.class_name)
    except (ExportRefused, VerifyRefused) as e:
        return _fail(f"{args.file}: not exported to ONNX: {e}")
    except ModuleNotFoundError as e:
        return _fail(f"--onnx {ONNX_MISSING if e.name in ('onnx', 'onnxscript') else f'needs {e.name}'}")
    except OSError as e:
        return _fail(f"cannot write {args.onnx}: {e.strerror or e}")
    print(f"wrote {args.onnx}")
    if not args.verify:
        return 0
    try:
        check = check_onnx(design, model, args.onnx)
    except ModuleNotFoundError as e:
        return _fail(f"--verify {ONNX_MISSING} ({e.name} is missing)")
    print(check.text())
    return 0 if check.ok else 1


def _fail(message: str) -> int:
    print(f"layerloom: {message}", file=sys.stderr)
    return 2
