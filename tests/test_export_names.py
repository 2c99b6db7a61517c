"""Hostile names: whatever a design's names hold, the export is code that compiles and runs, and
no name becomes code (nor breaks out of a comment or docstring)."""
from __future__ import annotations

import ast
import io
import keyword
import re
import tokenize

from layerloom import Design
from layerloom.export import module_source, verify
from layerloom.export.names import class_identifier, identifier, plain_text

PAYLOAD = '"""; import os; os.system("echo owned") #'
HOSTILE = ["class", "", "", "x", "x", "X", "Straße", "日本語", "3x3", 'quo"te', "it's", "two\nlines",
           PAYLOAD, "__import__('os').remove('f')", "\\N{BULLET}\\", "evil\u202e)txt", "self", "torch", "forward",
           "__init__", "lambda: 0", "print('hi')\n", "None", "a" * 300]
FRAGMENTS = ("import os", "os . system", "__import__", "remove (", "print (", "lambda", "owned")  # as tokens
SHAPE_COMMENT = re.compile(r"# \(N(, \d+)+\)(, \(N(, \d+)+\))*")


def hostile_design() -> Design:
    d = Design(PAYLOAD + "\n" + '\\"""')
    m = d.motif(PAYLOAD, **{"wid th": 4, '"x"': 2})
    i = m.input(PAYLOAD)
    m.add("Output", m.add("Pointwise", i, out_channels={"param": "wid th"}, name="class"))
    x = d.input(3, 8, 8, name="print('hi')")
    for name in HOSTILE:
        x = d.add("ReLU", x, name=name)
    y = d.add("Conv2d", x, out_channels=4, name="for")
    z = d.use(PAYLOAD, x, name=PAYLOAD, **{"wid th": 4})
    d.add("Output", d.add("Add", y, z, name="x"), name=PAYLOAD)
    d.add("Output", x, name="")
    return d


def _code_without_strings_and_comments(source: str) -> tuple[str, list[str], list[str]]:
    tokens = list(tokenize.generate_tokens(io.StringIO(source).readline))
    code = " ".join(["", *(t.string for t in tokens if t.type not in (tokenize.STRING, tokenize.COMMENT)), ""])
    return (code, [t.string for t in tokens if t.type == tokenize.COMMENT],
            [t.string for t in tokens if t.type == tokenize.STRING])


def test_hostile_names_export_to_code_that_compiles_runs_and_holds_no_fragment():
    design = hostile_design()
    source = module_source(design, date="2024-01-01")
    tree = ast.parse(source)
    code, comments, strings = _code_without_strings_and_comments(source)
    for fragment in FRAGMENTS:
        assert f" {fragment} " not in code, fragment
    assert all(SHAPE_COMMENT.fullmatch(c) for c in comments), comments
    # the only strings are the docstrings and the class name in __all__
    docstrings = [ast.get_docstring(n, clean=False) for n in [tree, *[c for c in tree.body if isinstance(c, ast.ClassDef)]]]
    assert len(strings) == len(docstrings) + 1
    for doc in docstrings[1:]:
        assert "\n" not in doc and '"' not in doc and "\\" not in doc and "\u202e" not in doc
    assert not any(isinstance(n, ast.Call) and isinstance(n.func, ast.Name) and n.func.id in ("print", "__import__")
                   for n in ast.walk(tree))
    names = {n.id for n in ast.walk(tree) if isinstance(n, ast.Name)} | {n.attr for n in ast.walk(tree)
                                                                          if isinstance(n, ast.Attribute)}
    assert all(n.isascii() for n in names)
    report = verify(design, source)  # builds and runs it in torch; every block must agree
    assert report.ok, report.table()


def test_duplicate_names_get_distinct_attributes():
    design = hostile_design()
    tree = ast.parse(module_source(design))
    top = [c for c in tree.body if isinstance(c, ast.ClassDef)][-1]
    init = next(f for f in top.body if isinstance(f, ast.FunctionDef) and f.name == "__init__")
    attrs = [t.attr for s in init.body if isinstance(s, ast.Assign) for t in s.targets]
    assert len(attrs) == len(set(attrs)) == len(design.blocks) - 4  # not the Input and the two Outputs, plus "x" Add
    assert {"x", "x_2", "X", "class_", "relu", "relu_2", "for_"} <= set(attrs)


def test_identifier_rules():
    taken: set[str] = set()
    got = [identifier(t, "conv", taken) for t in ("class", "", "", "3×3", "Straße", "日本語", "forward", "a-b c", "torch")]
    assert got == ["class_", "conv", "conv_2", "conv_3x3", "Stra_e", "conv_3", "forward_", "a_b_c", "torch_"]
    assert all(n.isidentifier() and not keyword.iskeyword(n) for n in got)
    assert class_identifier("inverted_residual", "Motif", set()) == "InvertedResidual"
    assert class_identifier("2 stage", "Motif", set()) == "Motif2Stage"
    assert len(identifier("a" * 300, "conv", set())) == 48


def test_plain_text_is_one_safe_line():
    text = plain_text('a "b"\\c\nd\u202e\te' + "z" * 200)
    assert text.startswith("a 'b'/c d e") and len(text) == 80 and text.endswith("…")
