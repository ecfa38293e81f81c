"""Figures and the HTML report: functions of the grid Dataset and a matplotlib Axes."""
