"""Layerloom: sketch a convolutional network as blocks, see every tensor shape and what it costs.

The scripting API lives in :mod:`layerloom.core`; the most used names are re-exported here::

    >>> from layerloom import Design
    >>> d = Design("tiny")
    >>> x = d.input(3, 32, 32)
    >>> y = d.add("Conv2d", x, out_channels=16, kernel=3, padding=1)
    >>> _ = d.add("Output", y)
    >>> str(d.analysis().shape(y))
    '16×32×32'

Importing this package never imports Qt, torch or numpy (the command line's ``check`` and ``ledger``
start faster without them).
"""
from layerloom.core.design import Design, Motif
from layerloom.core.fileformat import LoomFileError, load, save
from layerloom.core.ledger import Ledger

__all__ = ["Design", "Motif", "Ledger", "LoomFileError", "load", "save"]
__version__ = "0.1.0"

