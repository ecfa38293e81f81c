"""The report takes data, not the engine: importing it loads no module of workbench.engine."""

import subprocess
import sys


def test_the_report_imports_nothing_of_the_engine():
    code = (
        "import sys, workbench.report.document, workbench.report.panels, workbench.study.cells\n"
        "print(sorted(m for m in sys.modules if m.startswith('workbench.engine')))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
