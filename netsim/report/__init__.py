"""Tables and figures for proposals. Rendering only; never simulates.

The table renderer is imported eagerly (other layers use it); everything that needs matplotlib
or the lower layers is imported on first use:

- :func:`load_source` (scenario, run result or sweep store) -> :class:`ReportData`;
- :func:`report_tables`, :func:`report_figures`, :func:`write_report`;
- :func:`comparison_tables` and :func:`run_candidates` for topology comparison;
- :func:`to_dataframe` and :func:`report_frames` (pandas DataFrames, where pandas is installed).
"""

from importlib import import_module
from typing import Any

from netsim.report.table import FORMATS, Column, Table, format_number, render

__all__ = ["FORMATS", "Column", "ReportData", "Table", "comparison_tables", "format_number",
           "load_source", "render", "report_figures", "report_frames", "report_tables",
           "run_candidates", "to_dataframe", "write_report"]

_LAZY = {"ReportData": "sources", "load_source": "sources", "report_tables": "build",
         "report_figures": "build", "write_report": "build", "comparison_tables": "compare",
         "run_candidates": "compare", "to_dataframe": "frames", "report_frames": "frames"}


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        return getattr(import_module(f"netsim.report.{_LAZY[name]}"), name)
    raise AttributeError(f"module 'netsim.report' has no attribute {name!r}")
