"""workbench: stress-test a belief about where the optimum lies before spending real evaluations."""

__version__ = "0.1.0"
