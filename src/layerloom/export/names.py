"""Turning names written in a design into safe Python: identifiers for blocks and classes, and
plain one-line text for docstrings and comments.

Nothing a design holds can become code: identifiers keep only ASCII letters, digits and
underscores (accents are dropped, ``×`` reads as ``x``, other characters become ``_``), never start with a digit or an
underscore, and avoid keywords, builtins, the names the generated file itself uses and the
attributes of ``nn.Module``; duplicates get ``_2``, ``_3``, … Text for docstrings and comments
loses quotes, backslashes, line breaks and invisible characters.

>>> taken = set()
>>> identifier("3×3 conv", "conv", taken), identifier("class", "conv", taken), identifier("", "conv", taken)
('conv_3x3_conv', 'class_', 'conv')
"""
from __future__ import annotations

import builtins
import keyword
import re
import unicodedata

MAX_LENGTH = 48

NN_MODULE_ATTRIBUTES = frozenset("""
T_destination add_module apply bfloat16 buffers call_super_init children compile cpu cuda double
dump_patches eval extra_repr float forward get_buffer get_extra_state get_parameter get_submodule half ipu
load_state_dict modules mtia named_buffers named_children named_modules named_parameters parameters
register_backward_hook register_buffer register_forward_hook register_forward_pre_hook
register_full_backward_hook register_full_backward_pre_hook register_load_state_dict_post_hook
register_load_state_dict_pre_hook register_module register_parameter register_state_dict_post_hook
register_state_dict_pre_hook requires_grad_ set_extra_state set_submodule share_memory state_dict to
to_empty train training type xpu zero_grad
""".split())
"""Public attributes of ``torch.nn.Module`` (torch 2.x): a layer attribute with one of these names
would be shadowed by the method (a test compares this list with ``dir(torch.nn.Module)``)."""

GENERATED = frozenset({"torch", "nn", "self", "typing"})
"""Names the generated file itself uses."""

RESERVED = frozenset(keyword.kwlist) | frozenset(dir(builtins)) | NN_MODULE_ATTRIBUTES | GENERATED

_NOT_WORD = re.compile(r"[^0-9A-Za-z]+")


def _ascii_words(text: str) -> list[str]:
    """Runs of ASCII letters and digits: accents dropped, ``×`` read as ``x``, anything else splits."""
    folded = "".join(ch if ch.isascii() else "" if unicodedata.combining(ch) else " "
                     for ch in unicodedata.normalize("NFKD", str(text).replace("×", "x")))
    return [w for w in _NOT_WORD.split(folded) if w]


def _unique(candidate: str, taken: set[str]) -> str:
    if candidate in RESERVED:
        candidate += "_"
    name, n = candidate, 2
    while name in taken or name in RESERVED:
        name = f"{candidate}_{n}"
        n += 1
    taken.add(name)
    return name


def _shorten(text: str) -> str:
    return text[:MAX_LENGTH].rstrip("_")


def identifier(text: str, fallback: str, taken: set[str]) -> str:
    """A snake-style identifier for ``text`` not yet in ``taken`` (and added to it).

    ``fallback`` (a kind's stem such as ``conv``) stands in for an empty name and prefixes a
    name that would start with a digit.
    """
    name = _shorten("_".join(_ascii_words(text)))
    if not name:
        name = fallback
    elif name[0].isdigit():
        name = _shorten(f"{fallback}_{name}")
    return _unique(name, taken)


def class_identifier(text: str, fallback: str, taken: set[str]) -> str:
    """A CamelCase class name for ``text`` (``inverted_residual`` → ``InvertedResidual``)."""
    name = _shorten("".join(w[0].upper() + w[1:] for w in _ascii_words(text)))
    if not name:
        name = fallback
    elif name[0].isdigit():
        name = _shorten(fallback + name)
    return _unique(name, taken)


def check_class_name(name: str) -> str:
    """``name`` if it can name the generated class, else ValueError saying why."""
    if not (isinstance(name, str) and name.isascii() and name.isidentifier()):
        raise ValueError(f"class name {name!r} is not a Python identifier of ASCII letters, digits and underscores")
    if keyword.iskeyword(name) or name in GENERATED or name in dir(builtins):
        raise ValueError(f"class name {name!r} is a Python keyword or a name the exported file needs; choose another")
    return name


def plain_text(text: object, limit: int = 80) -> str:
    """``text`` as one line that is safe in a docstring or comment.

    Double quotes become single quotes, backslashes become ``/``, line breaks, control and
    invisible (format) characters become spaces; runs of spaces shrink to one; longer than
    ``limit`` characters is cut with ``…``.
    """
    out = []
    for ch in str(text):
        if ch == '"':
            ch = "'"
        elif ch == "\\":
            ch = "/"
        elif unicodedata.category(ch)[0] in "CZ":
            ch = " "
        out.append(ch)
    line = " ".join("".join(out).split())
    return line if len(line) <= limit else line[:limit - 1] + "…"
