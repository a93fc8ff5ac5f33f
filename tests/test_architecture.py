"""Data flows one way: no module imports the package root, and intake never imports outputs."""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).parent.parent / "layout"


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module:
            found.add(node.module)
        elif isinstance(node, ast.Import):
            found |= {a.name for a in node.names}
    return found


def test_no_module_imports_the_package_root() -> None:
    """Version and format names come from layout.meta, so no module needs `from layout import`."""
    offenders = [p.name for p in PACKAGE.rglob("*.py") if p.name != "__init__.py" and "layout" in _imports(p)]
    assert offenders == []


def test_intake_does_not_import_outputs() -> None:
    """The check reads returned files; what it shares with the sheets lives in neutral modules."""
    offenders = {
        p.name: sorted(m for m in _imports(p) if m.startswith("layout.outputs"))
        for p in (PACKAGE / "intake").glob("*.py")
    }
    assert {k: v for k, v in offenders.items() if v} == {}


def test_every_input_error_is_a_layout_error() -> None:
    """Readers raise the one exception tree, with file, place and message as data."""
    from layout.errors import LayoutError, PlanError, SpecError, UnreadableFile, UsageError

    for cls in (PlanError, SpecError, UnreadableFile, UsageError):
        assert issubclass(cls, LayoutError)
    err = PlanError.at("plan.json", "fingerprint", "differs")
    assert (err.problems[0].file, err.problems[0].where, err.problems[0].message) == (
        "plan.json",
        "fingerprint",
        "differs",
    )
