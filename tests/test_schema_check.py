"""The fast schema check keeps every check and every message of the reference validator.

Outside reference: jsonschema (the reference implementation of JSON Schema, Draft 2020-12) run
here directly on ``resources/loom.schema.json``. Over the broken files of the property suite
(:func:`test_properties.broken_texts`): whatever the compiled validator lets through, jsonschema
lets through too; where jsonschema finds an error, the loader's message is the place of the first
one (by path in the file) and jsonschema's own words; every other refusal names its place too.
"""
from __future__ import annotations

import json
import re

import jsonschema
import pytest
from hypothesis import HealthCheck, given, settings
from test_properties import BASES, broken_texts, examples

from layerloom.core import fileformat, schema_check
from layerloom.resource_paths import resource

REFERENCE = jsonschema.Draft202012Validator(json.loads(resource("loom.schema.json").read_text(encoding="utf-8")))
# a refusal after the schema check starts with the place: a block, wire or motif (inside a motif
# when it is one), or the design-wide field at fault
PLACE = re.compile(r"(motifs\[\d+\] \(.+?\) )?(blocks|wires)\[\d+\]|motifs\[\d+\]|target|baseline")


def _reference_error(data):
    errors = sorted(REFERENCE.iter_errors(data), key=lambda e: list(e.absolute_path))
    return errors[0] if errors else None


def _refusal(text: str) -> str | None:
    try:
        fileformat.parse(text, "fuzz.loom")
    except fileformat.LoomFileError as e:
        return str(e)
    return None


@settings(max_examples=max(1000, examples(1000)), suppress_health_check=[HealthCheck.too_slow])
@given(broken_texts())
def test_broken_files_are_refused_as_jsonschema_says_naming_the_place(text):
    message = _refusal(text)
    try:
        data = json.loads(text, parse_constant=fileformat._reject_constant)
    except (ValueError, RecursionError):
        assert message is not None and ("line" in message or "NaN" in message or "Infinity" in message), message
        return
    if not isinstance(data, dict) or data.get("format") != fileformat.FORMAT:
        assert message is not None and ("format" in message or "JSON object" in message), message
        return
    if data.get("version") != fileformat.VERSION:
        assert message is not None and "version" in message, message
        return
    try:
        error = _reference_error(data)
    except RecursionError:
        assert message is not None and "nested too deeply" in message
        return
    if error is not None:
        assert not schema_check._native().is_valid(data)  # the fast verdict never lets a broken file through
        path = list(error.absolute_path)
        assert message == f"fuzz.loom: {fileformat._place(data, path)}: {error.message}"
        assert path or "'" in error.message  # at the top level, jsonschema names the property
    elif message is not None:
        assert PLACE.match(message.removeprefix("fuzz.loom: ")), message


@pytest.mark.parametrize("base", range(len(BASES)))
def test_valid_files_pass_both_validators(base):
    assert schema_check.first_error(BASES[base]) is None
    assert _reference_error(BASES[base]) is None


def test_integer_beyond_64_bits_goes_to_the_reference():
    """The native validator cannot hold 2**70; jsonschema accepts it as an integer, so the file
    passes the schema (and the setting's own range check refuses it, naming the block)."""
    data = json.loads(json.dumps(BASES[0]))
    conv = next(i for i, b in enumerate(data["blocks"]) if b["kind"] == "Conv2d")
    data["blocks"][conv]["settings"]["out_channels"] = 2 ** 70
    assert schema_check.first_error(data) is None
    assert _reference_error(data) is None
    message = _refusal(json.dumps(data))
    assert message.startswith(f"fuzz.loom: blocks[{conv}] (conv_1): ") and "above the maximum" in message
