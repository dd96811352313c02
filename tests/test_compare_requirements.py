"""compare: which candidate meets more demands' requirements, and at what margin."""

from __future__ import annotations

import networkx as nx

from netsim.report.compare import Candidate, comparison_tables, meets, winner
from netsim.report.capacity import pair_key


def _row(name: str, rate: float, useful: float, fidelity: float, min_rate: float | None) -> dict[str, object]:
    return {"demand": name, "rate_per_s": rate, "rate_ci95": [rate * 0.99, rate * 1.01],
            "useful_rate_per_s": useful, "useful_rate_ci95": [useful * 0.99, useful * 1.01],
            "fidelity_mean": fidelity, "min_fidelity": 0.7, "min_rate_per_s": min_rate,
            "meets_fidelity": fidelity >= 0.7,
            "meets_rate": None if min_rate is None else useful >= min_rate}


def test_meets_needs_both_requirements_and_the_winner_ranks_useful_rates() -> None:
    """A candidate with more delivered pairs but fewer useful ones loses (common practice: only
    pairs above the threshold serve the users); one below its rate requirement is not eligible."""
    a = Candidate("Ashgrove", nx.Graph(), [_row("P-Q", 50.0, 40.0, 0.8, 30.0), _row("P-R", 20.0, 20.0, 0.9, None)])
    b = Candidate("Birchley", nx.Graph(), [_row("P-Q", 60.0, 35.0, 0.8, 30.0), _row("P-R", 20.0, 10.0, 0.65, None)])
    c = Candidate("Cobham", nx.Graph(), [_row("P-Q", 90.0, 25.0, 0.75, 30.0), _row("P-R", 30.0, 30.0, 0.9, None)])
    assert meets(a.demand(pair_key("P-Q"))) is True
    assert meets(c.demand(pair_key("P-Q"))) is False  # 25 < 30 useful pairs/s
    assert meets(b.demand(pair_key("P-R"))) is False  # fidelity 0.65 < 0.7
    assert winner([a, b, c], pair_key("P-Q")) == "Ashgrove"  # 40 > 35 useful; Cobham not eligible
    assert winner([a, b, c], pair_key("P-R")) == "Cobham"
    totals = comparison_tables([a, b, c])[1]
    served = {r["candidate"]: r["served"] for r in totals.rows}
    assert served == {"Ashgrove": 2, "Birchley": 1, "Cobham": 1}
    margins = {r["candidate"]: r["rate_margin"] for r in totals.rows}
    assert abs(margins["Cobham"] - 25 / 30) < 1e-12
    assert any("Ashgrove meets the requirements of 2 of 2 demands, 1 more than" in n for n in totals.notes)
