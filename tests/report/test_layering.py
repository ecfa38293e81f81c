"""The stages import downwards only: the report takes data, not the engine, and no module
imports a stage above its own, at module level or inside a function."""

import ast
import subprocess
import sys
from pathlib import Path

import workbench

PACKAGE = Path(workbench.__file__).parent
# validation, seeding, storage, gp < world < engine < study < analysis < report < plan <
# evidence < cli (with cli_args and cli_progress); the top-level helpers (and lazy, which
# imports none of workbench) share the lowest rank.
ORDER = {
    "validation": 0,
    "seeding": 0,
    "storage": 0,
    "gp": 0,
    "lazy": 0,
    "world": 1,
    "engine": 2,
    "study": 3,
    "analysis": 4,
    "report": 5,
    "plan": 6,
    "evidence": 7,
    "cli": 8,
    "cli_args": 8,
    "cli_progress": 8,
}


def _module(path: Path) -> list[str]:
    """``workbench.study.spec`` as ['workbench', 'study', 'spec'] (a package: its folder)."""
    parts = ["workbench", *path.relative_to(PACKAGE).with_suffix("").parts]
    return parts[:-1] if parts[-1] == "__init__" else parts


def _imported(path: Path) -> list[tuple[int, str]]:
    """(line, dotted module) of every import in the file, relative ones resolved, at any depth
    (module level, inside functions and classes)."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    package = _module(path) if path.name == "__init__.py" else _module(path)[:-1]
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out += [(node.lineno, alias.name) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - node.level + 1]
                head = ".".join(base + ([node.module] if node.module else []))
            else:
                head = node.module or ""
            # `from .. import analysis` imports the module workbench.analysis.
            out.append((node.lineno, head))
            out += [(node.lineno, f"{head}.{alias.name}") for alias in node.names]
    return out


def _stage(dotted: str) -> str | None:
    parts = dotted.split(".")
    if parts[0] != "workbench" or len(parts) < 2 or parts[1] not in ORDER:
        return None
    return parts[1]


def upward_imports() -> list[str]:
    """Every import of a higher stage, as 'file:line imports module'."""
    bad = []
    for path in sorted(PACKAGE.rglob("*.py")):
        own = _stage(".".join(_module(path)))
        if own is None:
            continue
        for line, dotted in _imported(path):
            other = _stage(dotted)
            if other is not None and ORDER[other] > ORDER[own]:
                bad.append(f"{path.relative_to(PACKAGE.parent)}:{line} imports {dotted}")
    return bad


def test_no_module_imports_a_higher_stage_not_even_inside_a_function():
    assert upward_imports() == []


def test_the_layering_check_sees_imports_inside_functions(tmp_path, monkeypatch):
    # The check itself must catch what the runtime check cannot: an import inside a function.
    fake = tmp_path / "workbench"
    (fake / "world").mkdir(parents=True)
    (fake / "world" / "lower.py").write_text(
        "import workbench.plan.document\n"
        "def f():\n    from ..evidence.history import read_history\n    return read_history\n"
    )
    (fake / "study").mkdir()
    (fake / "study" / "fine.py").write_text("from ..world import lower\nimport workbench.gp\n")
    monkeypatch.setattr(sys.modules[__name__], "PACKAGE", fake)
    assert upward_imports() == [
        "workbench/world/lower.py:1 imports workbench.plan.document",
        "workbench/world/lower.py:3 imports workbench.evidence.history",
        "workbench/world/lower.py:3 imports workbench.evidence.history.read_history",
    ]


# The registry is light by design (numpy; scipy.special at first use): the stages above the
# engine ask it what a strategy uses instead of testing strategy names.
ALLOWED = (
    "workbench.engine",
    "workbench.engine.acquisition",
    "workbench.engine.strategies",
)


def test_the_report_imports_nothing_of_the_engine_but_the_strategy_registry():
    code = (
        "import sys, workbench.report.document, workbench.report.panels, workbench.study.cells\n"
        "print('\\n'.join(sorted(m for m in sys.modules if m.startswith('workbench.engine'))))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    loaded = out.stdout.split()
    assert "workbench.engine.strategies" in loaded
    outside = [
        m for m in loaded if m not in ALLOWED and not m.startswith("workbench.engine.strategies.")
    ]
    assert outside == []
