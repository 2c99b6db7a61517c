"""Export of a design to PyTorch source, and its verification against the ledger.

>>> from layerloom import Design
>>> from layerloom.export import module_source
>>> d = Design("tiny"); x = d.input(3, 8, 8)
>>> _ = d.add("Output", d.add("Conv2d", x, out_channels=4))
>>> compile(module_source(d, date="2024-01-01"), "model.py", "exec") is not None
True

:func:`verify` needs torch (imported only when it is called); nothing here imports Qt.
"""
from layerloom.export.pytorch_source import Export, ExportRefused, export, module_source
from layerloom.export.verify import (BlockCheck, VerifyRefused, VerifyReport, load_module, refuse_placeholders,
                                     verify)

__all__ = ["BlockCheck", "Export", "ExportRefused", "VerifyRefused", "VerifyReport", "export", "load_module",
           "module_source", "refuse_placeholders", "verify"]
