"""Import: a PyTorch module (traced with torch.fx) or an ONNX file as a design.

>>> import torch
>>> from layerloom.importing import import_module
>>> net = torch.nn.Sequential(torch.nn.Conv2d(3, 8, 3, padding=1), torch.nn.ReLU())
>>> d = import_module(net, (3, 32, 32)).design
>>> [b.kind for b in d.blocks.values()], d.ledger().totals.weights
(['Input', 'Conv2d', 'ReLU', 'Output'], 224)

Operations with no kind of ours become ``Unmapped`` blocks carrying their traced shape, weights
and MACs (finding ``import.unmapped``); repeated submodules become uses of one motif. This
package needs torch (PyTorch sources) or onnx (ONNX files), imported only when used.
"""
from layerloom.importing.build import Imported
from layerloom.importing.plan import ImportFailed
from layerloom.importing.source import import_source, runs_code


def import_module(module, input_shape=(3, 224, 224), name=None, motifs=True) -> Imported:
    """A design read from an ``nn.Module`` instance; see :func:`layerloom.importing.fx.import_module`."""
    from layerloom.core.shapes import Shape
    from layerloom.importing.fx import import_module as read

    return read(module, Shape(tuple(input_shape)), name, motifs)


def import_onnx(path, input_shape=None, motifs=True) -> Imported:
    """A design read from an ONNX file; see :func:`layerloom.importing.onnx_graph.import_onnx`."""
    from layerloom.core.shapes import Shape
    from layerloom.importing.onnx_graph import import_onnx as read

    return read(path, Shape(tuple(input_shape)) if input_shape else None, motifs)


__all__ = ["ImportFailed", "Imported", "import_module", "import_onnx", "import_source", "runs_code"]
