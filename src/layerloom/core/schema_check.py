"""Checking a design file's data against ``resources/loom.schema.json``, the one description of
the format.

A validator compiled from the schema (jsonschema-rs, native code) gives the verdict: a 500-block
file is checked in well under a millisecond. Only when it says no does jsonschema, the reference
implementation, find the first broken place (by path in the file) and say why; broken files are
rare enough that its ~100 ms there do not matter, and its messages are the ones users have always
read. Anything the native validator refuses (also values it cannot hold, such as integers beyond
64 bits) goes to jsonschema, which has the last word.
"""
from __future__ import annotations

import json
from functools import cache

from layerloom.resource_paths import resource


@cache
def _schema() -> dict:
    return json.loads(resource("loom.schema.json").read_text(encoding="utf-8"))


@cache
def _native():
    import jsonschema_rs

    return jsonschema_rs.Draft202012Validator(_schema())


@cache
def _reference():
    import jsonschema

    return jsonschema.Draft202012Validator(_schema())


def first_error(data) -> tuple[list, str] | None:
    """``(path, message)`` of the first place (in path order) where ``data`` breaks the schema,
    or None when it fits. May raise RecursionError on absurdly deep nesting."""
    if _native().is_valid(data):
        return None
    errors = _reference().iter_errors(data)
    error = min(errors, key=lambda e: list(e.absolute_path), default=None)
    return None if error is None else (list(error.absolute_path), error.message)
