"""The package's public names: the lazy table and the names type checkers see are the same set.

Source: the package's own contract (``specmap.__all__``); no numbers involved.
"""

from __future__ import annotations

import ast
import importlib
from pathlib import Path

import specmap


def _type_checking_names() -> set[str]:
    tree = ast.parse(Path(specmap.__file__).read_text())
    names: set[str] = set()
    for node in tree.body:
        if isinstance(node, ast.If) and isinstance(node.test, ast.Name) and node.test.id == "TYPE_CHECKING":
            for imp in node.body:
                assert isinstance(imp, ast.ImportFrom)
                names |= {a.asname or a.name for a in imp.names}
    return names


def test_type_checking_block_mirrors_lazy_names():
    assert _type_checking_names() == set(specmap._LAZY)


def test_every_public_name_resolves_to_its_module():
    for name, (mod, attr) in specmap._LAZY.items():
        assert getattr(specmap, name) is getattr(importlib.import_module(mod), attr)


def test_unknown_name_is_an_attribute_error():
    try:
        specmap.no_such_name  # noqa: B018
    except AttributeError as exc:
        assert "no_such_name" in str(exc)
    else:  # pragma: no cover
        raise AssertionError("expected AttributeError")
