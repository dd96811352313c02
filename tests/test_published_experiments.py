"""Published heralded-entanglement experiments re-created (scenarios/published/): netsim's
heralding rate within a factor of 2 of the published one and its fidelity within 0.05 or the
paper's error bar, whichever is wider.

netsim's rate is the closed-form heralding rate of the link (heralded pairs per second while
attempting, :func:`netsim.network.budget`); its fidelity is that of the pairs the event engine
delivers, which includes memory decay while the herald travels back. Where netsim misses, the
case is kept as a strict xfail whose reason names what netsim lacks (or says plainly that an
input is too uncertain); tolerances are never widened. The README's "Published experiments"
table is checked against these figures.
"""

from __future__ import annotations

import functools
import re
from dataclasses import dataclass, field
from pathlib import Path

import pytest

from netsim.engine import run
from netsim.network import budget
from netsim.scenario import load

ROOT = Path(__file__).resolve().parent.parent
FOLDER = ROOT / "scenarios" / "published"


@dataclass(frozen=True)
class Published:
    """One experiment's published outcome (the check values) and where netsim is known to miss."""

    stem: str
    label: str
    platform: str
    fibre: str
    rate_per_s: float
    fidelity: float
    fidelity_err: float
    source: str
    rate_miss: str = ""
    fidelity_miss: str = ""
    notes: tuple[str, ...] = field(default_factory=tuple)


EXPERIMENTS = (
    # Bernien et al., Nature 497, 86 (2013): rate about one event per 10 minutes (memory),
    # fidelity 0.73 +- 0.04 (memory).
    Published("bernien2013_nv_3m", "Bernien et al. 2013", "NV centres", "3 m",
              1.7e-3, 0.73, 0.04, "Bernien et al., Nature 497, 86 (2013) (memory)",
              rate_miss=("attempt duty cycle: netsim attempts back to back, the experiment "
                         "interleaved attempt blocks with charge-and-resonance checks and "
                         "re-initialisation (and the attempt time is recalled, memory low)"),
              fidelity_miss=("emitter errors: spin initialisation, double excitation and "
                             "imperfect spin-photon entanglement are not modelled (only photon "
                             "distinguishability and dark counts are)")),
    # Hensen et al., Nature 526, 682 (2015): 245 events (paper) in about 220 h (memory);
    # fidelity 0.92 +- 0.03 (paper).
    Published("hensen2015_nv_1p3km", "Hensen et al. 2015", "NV centres", "1.7 km",
              245 / (220 * 3600), 0.92, 0.03, "Hensen et al., Nature 526, 682 (2015)"),
    # Stephenson et al., PRL 124, 110501 (2020): 182 /s and 0.940 +- 0.005 (memory, high).
    Published("stephenson2020_ions_2m", "Stephenson et al. 2020", "Sr+ ions", "2 m",
              182.0, 0.940, 0.005, "Stephenson et al., PRL 124, 110501 (2020) (memory)"),
    # Hucul et al., Nat. Phys. 11, 37 (2015): 4.5 /s and fidelity 0.78 (memory, medium).
    Published("hucul2015_ions_1m", "Hucul et al. 2015", "Yb+ ions", "1 m",
              4.5, 0.78, 0.0, "Hucul et al., Nat. Phys. 11, 37 (2015) (memory)",
              rate_miss=("attempt duty cycle: cooling between blocks of attempts is not modelled; "
                         "the collection efficiency and attempt rate are recalled (memory, low)"),
              fidelity_miss=("emitter errors: imperfect ion-photon entanglement and mode mismatch "
                             "beyond the interference visibility are not modelled; the visibility "
                             "is recalled (memory, low)")),
    # van Leent et al., Nature 607, 69 (2022): 0.01 /s at 33 km (memory, as quoted by later
    # work), fidelity 0.622 +- 0.015 (paper).
    Published("vanleent2022_atoms_33km", "van Leent et al. 2022", "Rb atoms (1517 nm conversion)", "33 km",
              0.01, 0.622, 0.015, "van Leent et al., Nature 607, 69 (2022)",
              rate_miss=("not a physics gap: the atom's photon collection efficiency is recalled "
                         "(memory, low) and the quoted rate is recalled (memory, medium)"),
              fidelity_miss=("atomic qubit decoherence during the ~180 us herald wait is modelled "
                             "only as T2 (recalled, memory low); the experiment's other error "
                             "sources at 33 km (converter noise, polarisation drift in the fibre) "
                             "are not modelled")),
    # Delteil et al., Nat. Phys. 12, 218 (2016): 2300 /s (paper); fidelity about 0.55 (memory, low).
    Published("delteil2016_qd_5m", "Delteil et al. 2016", "quantum-dot hole spins", "5 m",
              2300.0, 0.55, 0.0, "Delteil et al., Nat. Phys. 12, 218 (2016)",
              fidelity_miss=("spin dephasing of the hole within and between the Raman emission "
                             "windows and timing jitter of the detected photon are not modelled "
                             "(netsim keeps only visibility, phase noise, storage T2 and dark "
                             "counts); the published value is recalled (memory, low)"),
              notes=("bright-state population derived from the published rate: rate check tests timing only",)),
)

BY_STEM = {e.stem: e for e in EXPERIMENTS}


@functools.lru_cache(maxsize=None)
def netsim_figures(stem: str) -> tuple[float, float]:
    """(heralding rate per s, delivered fidelity) of one re-created experiment."""
    scenario = load(FOLDER / f"{stem}.toml")
    rate = float(budget(scenario).links[0]["pair_rate_per_s"])
    demand = run(scenario, pairs=200, seed=7).to_dict()["demands"][0]
    return rate, float(demand["fidelity_mean"])


def fidelity_tolerance(e: Published) -> float:
    return max(0.05, e.fidelity_err)


def test_the_suite_spans_platforms_and_distances() -> None:
    """At least six experiments on at least four platforms, from metres to tens of km, each with
    its own scenario file that cites the paper at the top."""
    assert len(EXPERIMENTS) >= 6
    kinds = {"NV centres": "colour centre", "Sr+ ions": "trapped ion", "Yb+ ions": "trapped ion",
             "Rb atoms (1517 nm conversion)": "neutral atom", "quantum-dot hole spins": "quantum dot"}
    assert len({kinds[e.platform] for e in EXPERIMENTS}) >= 4
    lengths = [load(FOLDER / f"{e.stem}.toml").links[0].length_km for e in EXPERIMENTS]
    assert min(lengths) <= 0.01 and max(lengths) >= 20.0
    assert sorted(p.stem for p in FOLDER.glob("*.toml")) == sorted(BY_STEM)
    for e in EXPERIMENTS:
        head = (FOLDER / f"{e.stem}.toml").read_text(encoding="utf-8").splitlines()[0]
        assert head.startswith("# ") and e.label.split(" et al.")[0].split()[-1] in head


SOURCE_MARK = re.compile(r"\((paper|memory|derived|common practice)[^)]*\)")
STRUCTURE_KEYS = {"name", "role", "ends", "users", "pairs", "purpose"}


@pytest.mark.parametrize("stem", sorted(BY_STEM))
def test_every_value_says_where_it_comes_from(stem: str) -> None:
    """Every physical value carries "(paper)", "(memory, ...)", "(derived ...)" or "(common
    practice)" on its line or in the comment block just above it (the house rule for check
    values); names, roles, ends and pair counts are structure, not values."""
    lines = (FOLDER / f"{stem}.toml").read_text(encoding="utf-8").splitlines()
    unmarked = []
    for i, line in enumerate(lines):
        key = re.match(r"^(\w+)\s*=", line)
        if not key or key.group(1) in STRUCTURE_KEYS:
            continue
        block, j = [line], i - 1
        while j >= 0 and lines[j].startswith("#"):
            block.append(lines[j])
            j -= 1
        if not any(SOURCE_MARK.search(b) for b in block):
            unmarked.append(f"line {i + 1}: {line}")
    assert not unmarked, unmarked


def _marks(reason: str) -> list[pytest.MarkDecorator]:
    return [pytest.mark.xfail(reason=reason, strict=True)] if reason else []


@pytest.mark.parametrize("e", [pytest.param(e, id=e.stem, marks=_marks(e.rate_miss)) for e in EXPERIMENTS])
def test_heralding_rate_within_a_factor_of_two(e: Published) -> None:
    rate, _ = netsim_figures(e.stem)
    assert 0.5 <= rate / e.rate_per_s <= 2.0, f"netsim {rate:.3g} /s vs published {e.rate_per_s:.3g} /s ({e.source})"


@pytest.mark.parametrize("e", [pytest.param(e, id=e.stem, marks=_marks(e.fidelity_miss)) for e in EXPERIMENTS])
def test_fidelity_within_tolerance(e: Published) -> None:
    _, fidelity = netsim_figures(e.stem)
    assert abs(fidelity - e.fidelity) <= fidelity_tolerance(e), (
        f"netsim {fidelity:.3f} vs published {e.fidelity:.3f} +- {e.fidelity_err:.3f} ({e.source})")


def test_engine_delivers_at_the_heralding_rate() -> None:
    """One link, users consuming on delivery: the engine's rate is the heralding rate (95 % interval)."""
    scenario = load(FOLDER / "stephenson2020_ions_2m.toml")
    rate = budget(scenario).links[0]["pair_rate_per_s"]
    low, high = run(scenario, pairs=2000, seed=3).to_dict()["demands"][0]["rate_ci95"]
    assert low <= rate <= high


def _fmt(x: float) -> str:
    return f"{x:.0f}" if x >= 100 else f"{x:.3g}" if x >= 1 else f"{x:.2g}"


def readme_rows() -> dict[str, list[str]]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## Published experiments", 1)[1].split("\n## ", 1)[0]
    rows = {}
    for line in section.splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) >= 9 and cells[0].endswith(")") and not cells[0].startswith("experiment"):
            rows[re.sub(r".*\((.*)\)$", r"\1", cells[0])] = cells
    return rows


def test_readme_table_matches_the_figures() -> None:
    """The README's table shows the published figures, netsim's and the ratio as computed here."""
    rows = readme_rows()
    assert sorted(rows) == sorted(BY_STEM)
    for stem, cells in rows.items():
        e = BY_STEM[stem]
        rate, fidelity = netsim_figures(stem)
        assert cells[3] == _fmt(e.rate_per_s) and cells[4] == _fmt(rate)
        assert cells[5] == f"{rate / e.rate_per_s:.2f}"
        assert cells[6].startswith(f"{e.fidelity:g}") and cells[7] == f"{fidelity:.2f}"
        assert cells[8] == f"{fidelity - e.fidelity:+.2f}"


def readme_table() -> str:
    """The table as it belongs in the README (python -c 'import tests...' prints it)."""
    lines = ["| experiment (file) | platform | fibre | published rate (1/s) | netsim rate (1/s) | ratio "
             "| published fidelity | netsim fidelity | difference | verdict |",
             "|---|---|---|---|---|---|---|---|---|---|"]
    for e in EXPERIMENTS:
        rate, fidelity = netsim_figures(e.stem)
        err = f" +- {e.fidelity_err:g}" if e.fidelity_err else " (no error bar)"
        verdict = []
        verdict.append("rate ok" if 0.5 <= rate / e.rate_per_s <= 2 else "rate missed")
        verdict.append("fidelity ok" if abs(fidelity - e.fidelity) <= fidelity_tolerance(e) else "fidelity missed")
        lines.append(f"| {e.label} ({e.stem}) | {e.platform} | {e.fibre} | {_fmt(e.rate_per_s)} | {_fmt(rate)} "
                     f"| {rate / e.rate_per_s:.2f} | {e.fidelity:g}{err} | {fidelity:.2f} "
                     f"| {fidelity - e.fidelity:+.2f} | {', '.join(verdict)} |")
    return "\n".join(lines)


if __name__ == "__main__":
    print(readme_table())
