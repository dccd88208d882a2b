"""The contributor guide's module map names every module of the package (issue 10 item 8).

Source: the tree itself; the check fails when a module is added without a word in DEVELOPERS.md.
"""

from __future__ import annotations

from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_every_module_is_in_the_guide():
    text = (ROOT / "DEVELOPERS.md").read_text()
    missing = []
    for path in sorted((ROOT / "specmap").rglob("*.py")):
        rel = path.relative_to(ROOT / "specmap").as_posix()
        if path.name in ("__init__.py", "__main__.py"):
            continue
        if rel not in text and f"`{path.name}`" not in text and f"{path.name} " not in text:
            missing.append(rel)
    assert not missing, f"modules missing from DEVELOPERS.md's map: {missing}"
