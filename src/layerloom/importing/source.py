"""What ``layerloom import SOURCE`` reads: an ONNX file, or a PyTorch module named by ``FILE.py:NAME``
or ``package.module:NAME`` (a ``nn.Module`` class, or a function returning a module, called with
keyword arguments). Pickled files (``.pt``, ``.pth``) are refused: loading one can run any code.
"""
from __future__ import annotations

import importlib
import importlib.util
import itertools
import sys
from pathlib import Path

from layerloom.core.shapes import Shape
from layerloom.importing.build import Imported
from layerloom.importing.plan import ImportFailed, one_line

PICKLES = (".pt", ".pth", ".pkl", ".ckpt", ".bin")
_serial = itertools.count(1)


def runs_code(source: str) -> str | None:
    """The one-line caution for a source whose import runs Python code, else None."""
    if source.lower().endswith(".onnx") or source.lower().endswith(PICKLES) or ":" not in source:
        return None
    where = source.rpartition(":")[0] or source
    return f"import runs {where}'s code — only import code you trust"


def import_source(source: str, input_shape: Shape | None = None, args: dict | None = None,
                  motifs: bool = True) -> Imported:
    """Import ``source`` (see the module docstring) as a design; :class:`ImportFailed` says why not."""
    lower = source.lower()
    if lower.endswith(PICKLES):
        raise ImportFailed(f"{source}: a {Path(source).suffix} file is a pickle, and unpickling can run any code it "
                           "holds, so Layerloom never opens one; import the module's class (FILE.py:NAME) or an "
                           ".onnx export instead")
    if lower.endswith(".onnx"):
        from layerloom.importing.onnx_graph import import_onnx

        return import_onnx(source, input_shape, motifs=motifs)
    where, colon, name = source.rpartition(":")
    if not colon or not where or not name.isidentifier():
        raise ImportFailed(f"{source}: give FILE.py:NAME, package.module:NAME or FILE.onnx")
    made = _construct(_load(where), where, name, args or {})
    from layerloom.importing.fx import import_module

    return import_module(made.eval(), input_shape or Shape.chw(3, 224, 224), name=name.replace("_", "-").lower(),
                         motifs=motifs)


def _load(where: str):
    """The Python module ``where`` names: a file path (ends in .py) or a dotted module name."""
    if where.endswith(".py"):
        path = Path(where)
        if not path.is_file():
            raise ImportFailed(f"{where}: no such file")
        spec = importlib.util.spec_from_file_location(f"layerloom_import_{next(_serial)}", path)
        module = importlib.util.module_from_spec(spec)
        sys.modules[spec.name] = module
        try:
            spec.loader.exec_module(module)
        except BaseException as e:  # noqa: BLE001 — the user's file failing, reported in one line
            sys.modules.pop(spec.name, None)
            if isinstance(e, KeyboardInterrupt):
                raise
            raise ImportFailed(f"{where} raised {type(e).__name__} while it ran: {one_line(e)}") from None
        return module
    try:
        return importlib.import_module(where)
    except ModuleNotFoundError as e:
        raise ImportFailed(f"{where}: no module of that name ({one_line(e)})") from None
    except Exception as e:  # noqa: BLE001
        raise ImportFailed(f"{where} raised {type(e).__name__} while it ran: {one_line(e)}") from None


def _construct(module, where: str, name: str, args: dict):
    from torch import nn

    factory = getattr(module, name, None)
    if factory is None:
        raise ImportFailed(f"{where} has no {name}")
    if isinstance(factory, nn.Module):
        return factory
    if not callable(factory):
        raise ImportFailed(f"{where}:{name} is a {type(factory).__name__}, not an nn.Module class or a function")
    try:
        made = factory(**args)
    except Exception as e:  # noqa: BLE001
        given = ", ".join(f"{k}={v!r}" for k, v in args.items())
        raise ImportFailed(f"{name}({given}) raised {type(e).__name__}: {one_line(e)}") from None
    if not isinstance(made, nn.Module):
        raise ImportFailed(f"{name}() returned a {type(made).__name__}, not an nn.Module")
    return made

