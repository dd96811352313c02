"""The report's tables as pandas DataFrames, for Python users (pandas is an optional extra).

Columns are the row keys (units in the names); every ``[low, high]`` interval becomes two
columns ``<key>_low`` and ``<key>_high`` so that the frame holds plain numbers. The headers shown
to readers are kept in ``frame.attrs["headers"]`` and the table's title and notes in
``frame.attrs["title"]`` / ``frame.attrs["notes"]``.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from netsim.errors import NetsimError
from netsim.report.table import Table

__all__ = ["report_frames", "to_dataframe"]


def _pandas() -> Any:
    try:
        import pandas
    except ImportError:
        raise NetsimError("pandas is not installed; install netsim[tables] for DataFrames") from None
    return pandas


def _is_interval(value: Any) -> bool:
    return isinstance(value, (list, tuple)) and len(value) == 2


def to_dataframe(table: Table) -> Any:
    """A :class:`pandas.DataFrame` of ``table`` (see the module docstring for its layout)."""
    pandas = _pandas()
    records = table.to_records()
    intervals = {c.key for c in table.columns if any(_is_interval(r.get(c.key)) for r in records)}
    rows = []
    for record in records:
        row: dict[str, Any] = {}
        for key, value in record.items():
            if key in intervals:
                low, high = value if _is_interval(value) else (None, None)
                row[f"{key}_low"], row[f"{key}_high"] = low, high
            else:
                row[key] = value
        rows.append(row)
    frame = pandas.DataFrame(rows)
    frame.attrs.update(title=table.title, notes=list(table.notes),
                       headers={c.key: c.header for c in table.columns})
    return frame


def report_frames(source: str | Path, **options: Any) -> dict[str, Any]:
    """Every table of the report of ``source`` as a DataFrame, by table name.

    ``options`` go to :func:`netsim.report.sources.load_source` (``simulate``, ``run_options``,
    ``scenario_path``).

    Examples
    --------
    >>> frames = report_frames("scenarios/chain3.toml")  # doctest: +SKIP
    >>> frames["links"][["link", "plob_bits_per_s"]]  # doctest: +SKIP
    """
    from netsim.report.build import report_tables
    from netsim.report.sources import load_source

    return {name: to_dataframe(t) for name, t in report_tables(load_source(source, **options)).items()}
