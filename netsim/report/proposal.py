"""One self-contained PDF to attach to a proposal, typeset with Typst (the ``typst`` package).

:func:`write_proposal` assembles, from a report's data, tables and figures:

1. title, the scenario's purpose, the command, netsim version and seed;
2. a one-page summary: demands met and missed, the bottleneck links, headline figures;
3. the assumptions: every parameter used, its value, unit, where it applies, profile and source;
4. every report table, whatever its columns, split into column groups (the first column repeated)
   so that none is wider than a landscape page, header rows repeated across pages;
5. the figures, numbered, each caption saying what is shown and under which assumptions;
6. the sensitivity ranking (table and tornado charts) when one is given;
7. method notes (bounds, intervals, what is and is not modelled) and the cautions.

All text from scenarios and tables enters the Typst source as string literals, so no character a
user writes can change the layout.
"""

from __future__ import annotations

import datetime as _dt
import math
import tempfile
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from matplotlib.figure import Figure

from netsim.report.sources import ReportData
from netsim.table import Column, Table

__all__ = ["CAUTIONS", "PAGE_TEXT_WIDTH_MM", "Provenance", "assumption_rows", "column_groups",
           "proposal_source", "summary", "write_proposal"]

#: Usable width of a landscape A4 page at the document's margins (297 mm - 2 x 12 mm).
PAGE_TEXT_WIDTH_MM = 273.0
#: Width of one character at the table font size (7 pt; a generous average, digits included),
#: and the padding of a cell, both in mm.
_CHAR_MM = 1.3
_CELL_PAD_MM = 2.6
#: A text cell wraps at spaces beyond this many characters (names, routes).
_WRAP_CHARS = 34

CAUTIONS = (
    "Every figure in this document is a planning estimate from models with stated assumptions, "
    "not a measurement or a guarantee; check it against your own link characterisation before "
    "committing money or schedules.",
    "Work on real links involves fibre-coupled lasers: observe IEC 60825-1 (safety of laser "
    "products) and IEC 60825-2 (optical fibre communication systems); never look into a live "
    "fibre end or connector, and treat frequency-conversion pump lasers as possibly Class 4.",
    "Cryogenic single-photon detectors bring asphyxiation risk from evaporating cryogens (use "
    "oxygen monitors), cold burns and pressure hazards (pressure relief).",
    "Defer to local codes, your site's safety officer and licensed practice.",
)

METHOD_NOTES = (
    ("Closed forms", "Per link: loss budget, heralding success and heralded state of the link's "
     "scheme (two-photon detection after Barrett & Kok, PRA 71, 060310, 2005; single-photon "
     "detection after Cabrillo et al., PRA 59, 1025, 1999; a midpoint pair source; direct "
     "transmission), multiplexed over the link's modes. Per demand: the route of the scenario's "
     "routing policy, the expected time until every hop holds a pair when swapping as soon as "
     "possible (after Shchukin, Schmidt & van Loock, PRA 100, 032322, 2019) and the fidelity of "
     "the swapped chain of Werner pairs."),
    ("Bounds", "Repeaterless bound -log2(1 - eta) per channel use (Pirandola, Laurenza, Ottaviani "
     "& Banchi, Nat. Commun. 8, 15043, 2017); single-path (widest path) and multipath (minimum "
     "cut) network bounds over the links' bounds as heralded (Pirandola, Commun. Phys. 2, 51, "
     "2019). No protocol sending one photon per attempt and mode approaches them at metro "
     "distances."),
    ("Simulation", "A discrete-event simulation runs every demand: heralding (the number of "
     "rounds to success is geometric), storage with memory decay (amplitude damping T1, total "
     "coherence T2), swapping, cut-offs, purification and contention for memory slots and "
     "fibres. Simulated figures carry 95 % intervals: exact Poisson (Garwood) for rates, "
     "Student t for means."),
    ("Sensitivity", "Sobol' indices (Saltelli et al., Comput. Phys. Commun. 181, 259, 2010) or "
     "Morris screening (Morris, Technometrics 33, 161, 1991) computed with SALib over the "
     "parameter ranges stated in the ranking; ST is the share of a figure's variance a "
     "parameter accounts for, alone or with others."),
    ("Not modelled", "Classical network latency beyond fibre delay, detector dead time and "
     "after-pulsing, polarisation drift and its compensation, multi-photon terms beyond those of "
     "the schemes named above, finite-key effects on key rates, failures and maintenance of "
     "equipment, and costs unless the tables show them."),
)


@dataclass(frozen=True)
class Provenance:
    """What produced the document: the command as typed, the source file and the seed."""

    command: str
    source: str
    seed: int | None = None
    version: str = ""
    created_utc: str = ""


# --------------------------------------------------------------------------- typst helpers


def _s(text: Any) -> str:
    """A Typst string literal holding ``text`` exactly."""
    body = str(text).replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n").replace("\r", "")
    return f'"{body}"'


def _para(text: str) -> str:
    return f"#par({_s(text)})\n"


def _heading(text: str, level: int = 1) -> str:
    return f"#heading(level: {level}, {_s(text)})\n"


def _cell_width_mm(texts: Sequence[str], header: str) -> float:
    longest_word = max((len(w) for w in header.split()), default=1)
    cells = [min(len(t), max(_WRAP_CHARS, max((len(w) for w in t.split()), default=0))) for t in texts]
    chars = max([longest_word, min(len(header), 16), *cells])
    return chars * _CHAR_MM + _CELL_PAD_MM


def _widths_mm(table: Table) -> list[float]:
    cells = table.cells()
    return [_cell_width_mm([r[i] for r in cells], c.header) for i, c in enumerate(table.columns)]


def column_groups(table: Table, width_mm: float = PAGE_TEXT_WIDTH_MM) -> list[list[int]]:
    """Indices of the table's columns in groups that each fit ``width_mm``: the first column
    (the row's name) starts every group, the others follow in order."""
    widths = _widths_mm(table)
    if not widths:
        return []
    groups: list[list[int]] = []
    current, used = [0], widths[0]
    for i in range(1, len(widths)):
        if used + widths[i] > width_mm and len(current) > 1:
            groups.append(current)
            current, used = [0], widths[0]
        current.append(i)
        used += widths[i]
    groups.append(current)
    return groups


def without_empty_columns(table: Table) -> tuple[Table, list[str]]:
    """The table without columns that hold no value in any row, and their headers."""
    cells = table.cells()
    keep = [i for i, c in enumerate(table.columns) if i == 0 or not cells or any(r[i] != "-" for r in cells)]
    dropped = [c.header for i, c in enumerate(table.columns) if i not in keep]
    return Table(table.title, [table.columns[i] for i in keep], table.rows, table.notes), dropped


def _numeric(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return text in ("-", "inf", "-inf") or (text.startswith("[") and text.endswith("]"))
    return True


def _typst_table(table: Table, label: str, width_mm: float = PAGE_TEXT_WIDTH_MM, drop_empty: bool = True) -> str:
    """The table as Typst, in column groups of fixed widths (mm) that add up to at most
    ``width_mm``, so no table is wider than the page; text wraps inside its column. Columns
    without any value are left out (and named in a note) unless ``drop_empty`` is false."""
    table, dropped = without_empty_columns(table) if drop_empty else (table, [])
    cells = table.cells()
    widths = _widths_mm(table)
    out = []
    groups = column_groups(table, width_mm)
    for g, group in enumerate(groups):
        cols = [table.columns[i] for i in group]
        total = sum(widths[i] for i in group)
        scale = min(1.0, width_mm / total) if total else 1.0  # a lone over-wide column wraps
        sizes = ", ".join(f"{widths[i] * scale:.1f}mm" for i in group)
        align = ", ".join("right" if cells and all(_numeric(r[i]) for r in cells) else "left" for i in group)
        part = f" (columns {g + 1} of {len(groups)})" if len(groups) > 1 else ""
        out.append(f"#block(breakable: true, width: 100%)[#text(weight: \"bold\", {_s(table.title + part)})]\n")
        head = ", ".join(f"[#strong({_s(c.header)})]" for c in cols)
        body = ",\n  ".join(", ".join(_s(row[i]) for i in group) for row in cells)
        out.append(f"#table(columns: ({sizes},), align: ({align},), stroke: none,\n"
                   f"  table.hline(stroke: 0.6pt),\n  table.header({head}),\n  table.hline(stroke: 0.4pt),\n"
                   f"  {body}{',' if body else ''}\n  table.hline(stroke: 0.6pt),\n) <{label}-{g}>\n")
    notes = list(table.notes)
    if dropped:
        notes.append("Columns without any value here are left out: " + ", ".join(dropped) + ".")
    for note in notes:
        out.append(f"#text(size: 6.5pt, {_s(note)})\n\n")
    return "".join(out)


# --------------------------------------------------------------------------- summary


def _demand_requirements(data: ReportData) -> dict[str, dict[str, Any]]:
    out: dict[str, dict[str, Any]] = {}
    if data.scenario is not None:
        for d in data.scenario.demands:
            out[d.name] = {"min_fidelity": d.min_fidelity, "min_rate_per_s": getattr(d, "min_rate_per_s", None)}
    for row in data.demands:
        name = row.get("demand")
        if name is not None and name not in out:
            out[str(name)] = {"min_fidelity": row.get("min_fidelity"), "min_rate_per_s": row.get("min_rate_per_s")}
    return out


def _met(row: Mapping[str, Any], need: Mapping[str, Any], rate: float | None,
         fidelity: float | None) -> tuple[bool | None, str]:
    """Whether a demand is met, and why not: verdict fields when the tables carry them, else the
    fidelity (and rate, where a minimum is set) compared with the demand's requirement."""
    verdicts = {k: row[k] for k in ("meets_fidelity", "meets_rate") if row.get(k) is not None}
    if verdicts:
        # the verdicts decide; the reason names the requirement missed, as without verdicts
        missed = []
        if verdicts.get("meets_fidelity") is False:
            bar = need.get("min_fidelity", row.get("min_fidelity"))
            missed.append(f"fidelity below {bar:g}" if bar is not None else "misses fidelity")
        if verdicts.get("meets_rate") is False:
            bar = need.get("min_rate_per_s", row.get("min_rate_per_s"))
            missed.append(f"rate below {bar:g} pairs/s" if bar is not None else "misses rate")
        return not missed, "; ".join(missed)
    if need.get("min_fidelity") is None and need.get("min_rate_per_s") is None:
        return None, "requirement not known (scenario not found)"
    reasons = []
    if need.get("min_fidelity") is not None and fidelity is not None and fidelity < need["min_fidelity"]:
        reasons.append(f"fidelity below {need['min_fidelity']:g}")
    if need.get("min_rate_per_s") is not None and rate is not None and rate < need["min_rate_per_s"]:
        reasons.append(f"rate below {need['min_rate_per_s']:g} pairs/s")
    if fidelity is None and rate is None:
        return None, "no figures"
    return not reasons, "; ".join(reasons)


def summary(data: ReportData, tables: Mapping[str, Table]) -> dict[str, Any]:
    """The one-page summary as plain data: ``demands`` (name, rate, fidelity, requirement,
    met, why), ``bottlenecks`` (link, why) and ``headlines`` (lines of text)."""
    demand_table = tables.get("demands")
    link_table = tables.get("links")
    needs = _demand_requirements(data)
    simulated = bool(data.run)
    demands = []
    for row in (demand_table.rows if demand_table else []):
        name = str(row.get("demand"))
        rate = _num(row.get("rate_per_s")) if simulated else None
        rate = rate if rate is not None else _num(row.get("expected_rate_per_s"))
        fidelity = _num(row.get("fidelity_mean")) if simulated else None
        fidelity = fidelity if fidelity is not None else _num(row.get("expected_fidelity"))
        need = needs.get(name, {})
        met, why = _met(row, need, rate, fidelity)
        demands.append({"demand": name, "rate_per_s": rate, "fidelity": fidelity,
                        "min_fidelity": need.get("min_fidelity"), "min_rate_per_s": need.get("min_rate_per_s"),
                        "met": met, "why": why})
    bottlenecks = _bottlenecks(data, link_table.rows if link_table else [], demand_table.rows if demand_table else [])
    headlines = []
    known = [d for d in demands if d["met"] is not None]
    if known:
        headlines.append(f"{sum(1 for d in known if d['met'])} of {_count(len(known), 'demand')} met "
                         f"({'simulated' if simulated else 'closed-form expectations'}).")
    rates = [d["rate_per_s"] for d in demands if d["rate_per_s"] is not None]
    if rates:
        headlines.append(f"Rate {rates[0]:.3g} pairs/s." if len(rates) == 1 else
                         f"Rates from {min(rates):.3g} to {max(rates):.3g} pairs/s per demand.")
    fids = [d["fidelity"] for d in demands if d["fidelity"] is not None]
    if fids:
        headlines.append(f"Fidelity {fids[0]:.3f}." if len(fids) == 1 else
                         f"Fidelities from {min(fids):.3f} to {max(fids):.3f}.")
    if data.scenario is not None:
        km = sum(link.length_km for link in data.scenario.links)
        headlines.append(f"{_count(len(data.scenario.sites), 'site')}, "
                         f"{_count(len(data.scenario.links), 'fibre link')} ({km:.0f} km of fibre), "
                         f"{_count(len(data.scenario.demands), 'demand')}.")
    return {"demands": demands, "bottlenecks": bottlenecks, "headlines": headlines, "simulated": simulated}


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" + ("" if n == 1 else "s")


def _num(value: Any) -> float | None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def _bottlenecks(data: ReportData, link_rows: Sequence[Mapping[str, Any]],
                 demand_rows: Sequence[Mapping[str, Any]]) -> list[dict[str, str]]:
    """The busiest simulated links (utilisation), else per demand the route's link with the
    lowest analytic pair rate."""
    busy = sorted(((float(r["utilisation"]), str(r.get("link"))) for r in data.run_links
                   if _num(r.get("utilisation")) is not None), reverse=True)
    if busy:
        return [{"link": name, "why": f"busy {u:.0%} of the time (simulated)"} for u, name in busy[:3]]
    rate_of = {}
    for r in link_rows:
        rate = _num(r.get("rate_analytic_per_s"))
        if rate is not None and r.get("link"):
            ends = frozenset(str(r["link"]).split("-", 1)) if data.scenario is None else None
            rate_of[str(r["link"])] = (rate, ends)
    if data.scenario is not None:
        rate_of = {}
        for link, r in zip(data.scenario.links, link_rows):
            rate = _num(r.get("rate_analytic_per_s"))
            if rate is not None:
                rate_of[link.name] = (rate, frozenset((link.a, link.b)))
    limits: dict[str, list[str]] = {}
    for row in demand_rows:
        route = [s.strip() for s in str(row.get("route") or "").split(" > ") if s.strip()]
        pairs = {frozenset(p) for p in zip(route, route[1:])}
        on_route = [(rate, name) for name, (rate, ends) in rate_of.items() if ends in pairs]
        if on_route:
            limits.setdefault(min(on_route)[1], []).append(str(row.get("demand")))
    ranked = sorted(limits.items(), key=lambda kv: (-len(kv[1]), rate_of[kv[0]][0]))
    return [{"link": name, "why": f"slowest link ({rate_of[name][0]:.3g} pairs/s analytic) on the route of "
             + ", ".join(who)} for name, who in ranked[:3]]


# --------------------------------------------------------------------------- assumptions

_SITE_SKIP = ("name", "role", "x_km", "y_km")
_LINK_SKIP = ("index", "a", "b")


def assumption_rows(scenario: Any) -> list[dict[str, Any]]:
    """Every parameter the scenario uses: one row per (key, value), naming the sites or links
    it applies to, its unit, the profile it came from (where the scenario names one) and its
    source (the entry itself, the scenario's defaults, or netsim's built-in default)."""
    import dataclasses

    from netsim.scenario import fields as F

    data = scenario.data
    rows: list[dict[str, Any]] = []
    sections = (("site", scenario.sites, data.get("sites") or [], F.SITE_FIELDS, _SITE_SKIP),
                ("link", scenario.links, data.get("links") or [], F.LINK_FIELDS, _LINK_SKIP))
    for kind, entries, raws, specs, skip in sections:
        defaults = (data.get("defaults") or {}).get(kind) or {}
        keys = [f.name for f in dataclasses.fields(entries[0])] if entries else []
        for key in keys:
            if key in skip:
                continue
            groups: dict[tuple[str, str, str], list[str]] = {}
            for entry, raw in zip(entries, raws):
                if kind == "site" and entry.role == "switch" and key not in raw:
                    continue  # a passive switch uses none of the memory keys
                value = getattr(entry, key)
                if value is None:
                    continue
                source = ("scenario file, this entry" if key in raw else
                          "scenario file, [defaults." + kind + "]" if key in defaults else
                          "netsim built-in default")
                profile = raw.get("profile") or defaults.get("profile") or getattr(entry, "profile", None) or ""
                sources = getattr(entry, "sources", None)
                if isinstance(sources, Mapping) and sources.get(key):
                    source = str(sources[key])
                groups.setdefault((_value_text(value), str(profile), source), []).append(entry.name)
            spec = specs.get(key)
            for (value, profile, source), names in groups.items():
                others = [e.name for e in entries if e.name not in names]
                applies = (f"all {len(entries)} {kind}s" if not others else
                           f"all {kind}s except " + ", ".join(others) if len(others) < len(names) and len(names) > 3
                           else ", ".join(names))
                rows.append({"parameter": f"{kind} {key}", "value": value, "unit": spec.unit if spec else "",
                             "applies_to": applies, "profile": profile or "-", "source": source})
    for key, value in dataclasses.asdict(scenario.protocol).items():
        raw = (data.get("protocol") or {})
        rows.append({"parameter": f"protocol {key}", "value": _value_text(value), "unit": "",
                     "applies_to": "every demand", "profile": "-",
                     "source": "scenario file, [protocol]" if key in raw else "netsim built-in default"})
    return rows


def _value_text(value: Any) -> str:
    if isinstance(value, float):
        return f"{value:.6g}"
    if value is None:
        return "none"
    return str(value)


ASSUMPTION_COLUMNS = (Column("parameter", "parameter"), Column("value", "value"), Column("unit", "unit"),
                      Column("applies_to", "applies to"), Column("profile", "profile"),
                      Column("source", "source"))


# --------------------------------------------------------------------------- document


def _figure_caption(stem: str, fig: Figure, data: ReportData, assumptions: str) -> str:
    """What the figure shows (its label, set where it was drawn, or a description by name)
    and under which assumptions."""
    text = str(fig.get_label() or "")
    if stem == "network-map":
        return (f"Map of {data.title}: sites at their map coordinates (x_km, y_km) and the fibre links "
                f"between them, shaded as the colour bar states. {assumptions}")
    if stem == "rate-vs-distance":
        return ("Heralded pairs per attempt and mode against link length for each heralding scheme, "
                "with the repeaterless bound -log2(1 - eta); closed forms with the fibre, detectors and "
                "end sites of the scenario's first memory-to-memory link, only length and scheme varied; "
                "nothing simulated.")
    text = text or stem.replace("-", " ") + "."
    return f"{text[:1].upper()}{text[1:]} {assumptions}"


def _assumptions_line(data: ReportData, provenance: Provenance) -> str:
    if data.kind == "store":
        return ("Each sweep point simulated as stored in the sweep; every parameter not swept at the "
                "scenario's value.")
    if data.run:
        stop = data.run.get("stop") or {}
        stop_text = ", ".join(f"{k} {v}" for k, v in stop.items() if v is not None) if isinstance(stop, Mapping) else ""
        return (f"Simulated ({stop_text or 'as run'}), seed {data.run.get('seed', provenance.seed)}; "
                "hardware at the scenario's values (see Assumptions).")
    return "Closed forms at the scenario's values (see Assumptions); nothing simulated."


def proposal_source(data: ReportData, tables: Mapping[str, Table], figures: Mapping[str, Figure],
                    provenance: Provenance, sensitivity: Any = None,
                    figure_files: Mapping[str, str] | None = None) -> str:
    """The Typst source of the document (figures referenced by ``figure_files``: stem -> file)."""
    figure_files = figure_files or {}
    if provenance.seed is None and data.run and data.run.get("seed") is not None:
        provenance = Provenance(provenance.command, provenance.source, int(data.run["seed"]),
                                provenance.version, provenance.created_utc)
    purpose = getattr(data.scenario, "purpose", "") if data.scenario is not None else ""
    parts = [
        '#set document(title: ' + _s(f"{data.title}: planning estimates") + ')\n',
        '#set page(paper: "a4", margin: (x: 18mm, y: 16mm), numbering: "1 / 1")\n',
        '#set text(size: 9pt, font: ("Libertinus Serif", "New Computer Modern"))\n',
        '#set par(justify: false)\n',
        '#set heading(numbering: "1.")\n',
        '#show table: set text(size: 7pt)\n',
        '#set table(inset: (x: 0.9mm, y: 0.8mm))\n',
        '#show figure.caption: set text(size: 8pt)\n',
        f"#align(center, text(size: 17pt, weight: \"bold\", {_s(data.title)}))\n",
        f"#align(center, text(size: 11pt, {_s('Quantum network planning estimates')}))\n",
        _para(f"Purpose: {purpose}" if purpose else
              "Purpose: not stated in the scenario ([network] purpose)." if data.scenario is not None else
              "Purpose, assumptions and requirements unknown: the scenario file was not found "
              "(give it with --scenario FILE)."),
        _para(f"Produced by netsim {provenance.version} with the command: {provenance.command}"),
        _para(f"Source: {provenance.source} ({_source_kind(data)})"
              + (f"; seed {provenance.seed}" if provenance.seed is not None else "")
              + (f"; {provenance.created_utc}" if provenance.created_utc else "") + "."),
    ]
    parts.append(_summary_section(data, tables, sensitivity))
    parts.append("#pagebreak()\n")
    if data.scenario is not None:
        parts.append(_heading("Assumptions"))
        parts.append(_para("Every parameter the estimates use, with its value, unit, where it applies, "
                           "the hardware profile it came from and its source."))
        table = Table("Assumptions", ASSUMPTION_COLUMNS, list(assumption_rows(data.scenario)))
        parts.append(_typst_table(table, "tab-assumptions", width_mm=174.0, drop_empty=False))
    parts.append('#set page(flipped: true, margin: (x: 12mm, y: 14mm))\n')
    parts.append(_heading("Tables"))
    for n, (stem, table) in enumerate(tables.items()):
        parts.append(_typst_table(table, f"tab-{n}"))
    parts.append('#set page(flipped: false, margin: (x: 18mm, y: 16mm))\n')
    assumptions = _assumptions_line(data, provenance)
    if figure_files:
        parts.append(_heading("Figures"))
        for stem, fig in figures.items():
            if stem not in figure_files:
                continue
            caption = _figure_caption(stem, fig, data, assumptions)
            width = "100%" if fig.get_figwidth() > 5 else "72%"
            parts.append(f"#figure(image({_s(figure_files[stem])}, width: {width}), caption: {_s(caption)})\n")
    if sensitivity is not None:
        parts.append(_sensitivity_section(sensitivity, figure_files))
    parts.append(_heading("Method notes"))
    for title, text in METHOD_NOTES:
        parts.append(f"#par[#strong({_s(title + '.')}) #{_s(text)}]\n")
    parts.append(_heading("Cautions"))
    for text in CAUTIONS:
        parts.append(f"- #{_s(text)}\n")
    parts.append(_heading("Provenance"))
    parts.append(_para(f"Command: {provenance.command}"))
    parts.append(_para(f"netsim version {provenance.version}; seed "
                       f"{provenance.seed if provenance.seed is not None else 'not used'}; source {provenance.source}."))
    return "".join(parts)


def _source_kind(data: ReportData) -> str:
    return {"scenario": "scenario file" + (", simulated" if data.run else ", closed forms"),
            "run": "run result", "store": "sweep store"}.get(data.kind, data.kind)


def _leading_parameters(result: Any) -> list[str]:
    """One line per ranked figure: the parameter ranked first for the most demands."""
    from collections import Counter

    lines = []
    for figure in dict.fromkeys(r["figure"] for r in result.rows):
        firsts = Counter(r["parameter"] for r in result.rows if r["figure"] == figure and r["rank"] == 1)
        if firsts:
            name, count = firsts.most_common(1)[0]
            demands = len({r["demand"] for r in result.rows})
            lines.append(f"{figure[0].upper() + figure[1:]} moves most with {name} (ranked first for "
                         f"{count} of {demands} demands; see the sensitivity section).")
    return lines


def _summary_section(data: ReportData, tables: Mapping[str, Table], sensitivity: Any = None) -> str:
    found = summary(data, tables)
    parts = [_heading("Summary")]
    headlines = found["headlines"] + (_leading_parameters(sensitivity) if sensitivity is not None else [])
    parts += [f"- #{_s(line)}\n" for line in headlines]
    rows: list[Mapping[str, Any]] = []
    for d in found["demands"]:
        need = []
        if d["min_fidelity"] is not None:
            need.append(f"F >= {d['min_fidelity']:g}")
        if d["min_rate_per_s"] is not None:
            need.append(f">= {d['min_rate_per_s']:g} pairs/s")
        verdict = "unknown" if d["met"] is None else "met" if d["met"] else "missed"
        rows.append({"demand": d["demand"], "need": ", ".join(need) or "-", "rate": d["rate_per_s"],
                     "fidelity": d["fidelity"], "verdict": verdict, "why": d["why"] or "-"})
    what = "simulated" if found["simulated"] else "expected (closed form)"
    table = Table(f"Demands met and missed ({what} rate and fidelity)",
                  [Column("demand", "demand"), Column("need", "requirement"),
                   Column("rate", "rate (pairs/s)", 3), Column("fidelity", "fidelity", 4),
                   Column("verdict", "verdict"), Column("why", "why")], rows)
    parts.append(_typst_table(table, "tab-summary", width_mm=174.0))
    if found["bottlenecks"]:
        parts.append(f"#strong({_s('Bottleneck links')})\n\n")
        parts += [f"- #{_s(b['link'] + ': ' + b['why'])}\n" for b in found["bottlenecks"]]
    return "".join(parts)


def _sensitivity_section(result: Any, figure_files: Mapping[str, str]) -> str:
    parts = ['#set page(flipped: true, margin: (x: 12mm, y: 14mm))\n', _heading("Which parameter matters most")]
    table = result.table()
    top = Table(table.title + " (three most important per demand and figure)", table.columns,
                [r for r in table.rows if r["rank"] <= 3], table.notes)
    parts.append(_typst_table(top, "tab-sensitivity"))
    parts.append('#set page(flipped: false, margin: (x: 18mm, y: 16mm))\n')
    how = "Sobol' total index ST" if result.method == "sobol" else "Morris mu*"
    for stem, file in figure_files.items():
        if stem.startswith("tornado-"):
            demand = next((r["demand"] for r in result.rows if file_stem_of(f"tornado-{r['demand']}") == stem), stem)
            caption = (f"Tornado chart for {demand}: each figure with one parameter at the low (light) and "
                       f"high (dark) end of its range, the others at the scenario's values; parameters "
                       f"ordered by the {how} over all parameters varied together (closed forms unless "
                       "stated in the table).")
            parts.append(f"#figure(image({_s(file)}, width: 100%), caption: {_s(caption)})\n")
    return "".join(parts)


def file_stem_of(text: str) -> str:
    from netsim.report.build import file_stem

    return file_stem(text)


def write_proposal(path: str | Path, data: ReportData, tables: Mapping[str, Table],
                   figures: Mapping[str, Figure], provenance: Provenance, sensitivity: Any = None,
                   dpi: int = 150, saved: Mapping[str, Path] | None = None) -> Path:
    """Typeset the document to ``path`` (PDF) and return it. ``saved`` maps figure stems to PNG
    files already written, which are used instead of drawing those figures again."""
    import shutil

    import typst

    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    if not provenance.created_utc:
        provenance = Provenance(provenance.command, provenance.source, provenance.seed, provenance.version,
                                _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M UTC"))
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        files: dict[str, str] = {}
        charts = dict(figures)
        if sensitivity is not None:
            from netsim.report.tornado import tornado_figures

            charts.update(tornado_figures(sensitivity))
        for n, (stem, fig) in enumerate(charts.items()):
            name = f"figure-{n:03d}.png"
            if saved and stem in saved:
                shutil.copyfile(saved[stem], root / name)
            else:
                fig.savefig(root / name, dpi=dpi)
            files[stem] = name
        source = proposal_source(data, tables, figures, provenance, sensitivity, files)
        (root / "proposal.typ").write_text(source, encoding="utf-8")
        pdf = typst.compile(str(root / "proposal.typ"), root=str(root))
    if not isinstance(pdf, bytes):
        raise RuntimeError("typst returned no PDF")
    path.write_bytes(pdf)
    return path
