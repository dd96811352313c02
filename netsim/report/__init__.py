"""Tables and figures for proposals. Rendering only; never simulates."""

from netsim.report.table import FORMATS, Column, Table, format_number, render

__all__ = ["FORMATS", "Column", "Table", "format_number", "render"]
