"""Packaging: every subpackage ships, and the grammar is found."""

import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def test_every_subpackage_is_listed_in_pyproject():
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"])
    found = {".".join(p.parent.relative_to(ROOT).parts) for p in (ROOT / "dcnet").rglob("__init__.py")}
    assert found <= listed, f"add to [tool.setuptools] packages: {sorted(found - listed)}"
    assert "dcnet.grammar" in listed


def test_grammar_is_found():
    from dcnet.language.parser import grammar_path

    assert grammar_path().name == "dcnet.lark"
