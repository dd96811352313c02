"""The table renderer, re-exported here for report code; it lives in :mod:`netsim.table`, below
every layer that builds tables (``network``, ``engine``), so that no lower layer imports
``report``."""

from netsim.table import (
    FORMATS,
    NOTE_WIDTH,
    Column,
    Table,
    format_number,
    render,
    sig_for_interval,
    tex_escape,
    tex_number,
)

__all__ = ["FORMATS", "NOTE_WIDTH", "Column", "Table", "format_number", "render", "sig_for_interval",
           "tex_escape", "tex_number"]
