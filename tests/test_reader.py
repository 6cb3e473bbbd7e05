"""The one TOML reader: deep nesting, message length, one reader for every kind of file."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from bandpert.cli.app import main
from bandpert.data import MATERIALS_DIR
from bandpert.errors import InputError
from bandpert.input import kp_file, material
from bandpert.input.reader import (
    MAX_DEPTH,
    TableReader,
    check_depth,
    depth,
    read_toml_document,
    shorten,
)

ROOT = Path(__file__).resolve().parents[1]
MATERIALS = MATERIALS_DIR / "planewave"

DEEP_ARRAY = "a = " + "[" * 5000 + "]" * 5000 + "\n"
DEEP_TABLE = "a = " + "{b = " * 3000 + "1" + "}" * 3000 + "\n"
#: Deep enough to exceed the schema limit but shallow enough for the standard parser.
MODERATE = ("name = \"x\"\nsource = \"y\"\n[lattice]\ntype = \"chain\"\na_A = "
            + "[" * 40 + "]" * 40 + "\n")


@pytest.mark.parametrize("text", [DEEP_ARRAY, DEEP_TABLE, MODERATE],
                         ids=["arrays", "inline-tables", "moderate"])
@pytest.mark.parametrize("command", ["check", "bands", "kp", "sweep"])
def test_deep_nesting_is_refused_in_one_line(text, command, tmp_path, capsys):
    # RecursionError in the parser was reported as an internal error (exit 1).
    path = tmp_path / "deep.toml"
    path.write_text(text, encoding="utf-8")
    argv = [command, str(path), "--out", str(tmp_path / "out")]
    if command == "check":
        argv = argv[:2]
    if command == "sweep":
        argv += ["--vary", "lattice.a_A=1:2:2", "--engine", "serial"]
    with pytest.raises(SystemExit) as exit_info:
        main(argv)
    assert exit_info.value.code == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "nested" in err and str(path) in err
    assert not (tmp_path / "out").exists()


def test_depth_is_counted_without_recursion():
    node: list = []
    for _ in range(100_000):  # far beyond the interpreter's recursion limit
        node = [node]
    assert depth(node) == MAX_DEPTH + 1  # counting stops once the limit is passed
    assert depth({"a": [1, {"b": [2.0]}]}) == 4
    with pytest.raises(InputError, match="nested more than"):
        check_depth({"x": node}, "f.toml")


def test_bundled_files_are_well_inside_the_depth_limit():
    for path in MATERIALS.glob("*/*.toml"):
        assert depth(read_toml_document(path)) <= 5


def test_documents_given_in_code_are_checked_too():
    node: list = [0.0]
    for _ in range(50):
        node = [node]
    doc = {"name": "x", "source": "y", "lattice": {"type": "chain", "a_A": node}}
    with pytest.raises(InputError, match="nested"):
        material.parse_material(doc, "code")
    with pytest.raises(InputError, match="nested"):
        kp_file.parse_kp_material(doc, "code")


def test_long_values_are_cut_in_messages():
    long = "x" * 5000
    r = TableReader({"type": long, long: 1}, "f.toml", "lattice.")
    with pytest.raises(InputError) as info:
        r.string("type", choices=("fcc", "bcc"))
    assert len(info.value.one_line()) < 200
    r.raw("type")
    with pytest.raises(InputError) as info:
        r.finish()
    assert len(info.value.one_line()) < 200
    assert shorten("abc", 10) == "abc" and len(shorten("a" * 100, 10)) == 10


def test_kp_files_use_the_public_reader_only():
    # One reader serves material files, k·p files and documents (no private import across).
    tree = ast.parse(Path(kp_file.__file__).read_text(encoding="utf-8"))
    imported = {(node.module, alias.name) for node in ast.walk(tree)
                if isinstance(node, ast.ImportFrom) for alias in node.names}
    assert ("reader", "TableReader") in imported
    assert not any(name.startswith("_") for _, name in imported)
