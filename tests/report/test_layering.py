"""The report takes data, not the engine: importing it loads no module of workbench.engine but
the strategy registry (what each strategy uses and its description) and the acquisition
formulas its score hooks are written with; no model, search or batch engine."""

import subprocess
import sys

# The registry is light by design (numpy and scipy.special): the stages above the engine ask it
# what a strategy uses instead of testing strategy names.
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
