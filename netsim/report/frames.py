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
from netsim.table import Table

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


def report_frames(source: Any, *, scenario: Any = None, **options: Any) -> dict[str, Any]:
    """Every table of the report of ``source`` as a DataFrame, by table name.

    Parameters
    ----------
    source : path, ReportData or RunResult
        A file (scenario, ``run.json`` or sweep store; ``options`` go to
        :func:`netsim.report.sources.load_source`: ``simulate``, ``run_options``,
        ``scenario_path``), what ``load_source`` returned, or a run held in memory
        (``netsim.engine.run(...)``).
    scenario : Scenario, optional
        With a run held in memory: the scenario it was made from, for the analytic columns.

    Examples
    --------
    >>> frames = report_frames("scenarios/chain3.toml")  # doctest: +SKIP
    >>> frames["links"][["link", "plob_bits_per_s"]]  # doctest: +SKIP
    >>> frames = report_frames(engine.run(scenario, pairs=200), scenario=scenario)  # doctest: +SKIP
    """
    from netsim.report.build import report_tables
    from netsim.report.sources import ReportData, from_run_result, load_source

    if isinstance(source, ReportData):
        data = source
    elif isinstance(source, (str, Path)):
        data = load_source(source, **options)
    elif hasattr(source, "to_dict") and hasattr(source, "demands"):
        data = from_run_result(source, scenario)
    else:
        from netsim.errors import ParameterError

        raise ParameterError("source", type(source).__name__, "a file path, what load_source returned, "
                             "or a RunResult from netsim.engine.run")
    return {name: to_dataframe(t) for name, t in report_tables(data).items()}
