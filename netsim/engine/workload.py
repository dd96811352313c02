"""The expected cost of a run before it starts: refuse one beyond reason, warn about it in ``check``.

Per demand, :func:`netsim.network.workload.route_work` gives the expected heralded link pairs
and simulated seconds per delivered pair (natural logs: success probabilities of 1e-9 or
5e-324 neither overflow nor underflow). A run's stop rule says how many pairs (``pairs``; a
``precision`` R needs about (1.96 / R)^2 of them, inter-delivery times having a coefficient of
variation near one) or how many simulated seconds (``time_s``). Demands that contend for slots,
interfaces or fibres run together (:func:`netsim.engine.api._components`) until the last one
is done, the others heralding meanwhile; they take turns at what they share, so the group's
simulated time is taken as the sum of its members' times (their maximum for a timed stop) and
its serial work as ``sum_k (link pairs / second)_k x`` that time; its least work is the sum of
the members' own link pairs. On the bundled chain (5000 pairs) both are 15,700 against 13,400
heralded by the event engine; see :func:`expected_work` for a grid and the Vellmoor mesh.

A run whose least expected work (:func:`expected_work`: every demand heralding its own link
pairs, nothing shared slowing it) exceeds ``max_link_pairs`` link pairs (default
:data:`~netsim.network.workload.DEFAULT_MAX_LINK_PAIRS`, minutes of engine time) is refused
in one line before it starts, naming the demand, the expected link pairs, engine time and
simulated time; ``--max-link-pairs`` on ``netsim run`` and ``netsim sweep`` raises the limit.
The least work is never above what a run heralds on average, so no run is refused on a
pessimistic guess (a serial model of contention overstated a 10 x 10 grid 100-fold). As a
safety net the event engine itself stops (one line, :class:`RunLimitError`) once it has heralded
:data:`GUARD_FACTOR` times the larger of the limit and the serial figure, so an estimate that
was too low cannot hang.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from netsim.engine.chain import Chain
from netsim.engine.metrics import Z95, StopRule
from netsim.errors import NetsimError, Problem, ScenarioError
from netsim.network.workload import DEFAULT_MAX_LINK_PAIRS, LINK_PAIRS_PER_S, describe_seconds, route_work
from netsim.scenario.model import DEFAULT_DEMAND_PAIRS, Scenario

__all__ = ["GUARD_FACTOR", "RunLimitError", "RunWork", "check_run_work", "expected_work", "run_work_warnings"]

#: The event engine stops once it has heralded this many times the limit on link pairs.
GUARD_FACTOR = 4.0
#: ``check`` also warns when the scenario's own stop rule needs more simulated time than this (a year).
SIMULATED_WARNING_S = 365.25 * 86400.0


class RunLimitError(NetsimError):
    """A run stopped by the engine's guard on heralded link pairs (one line)."""


@dataclass(frozen=True)
class RunWork:
    """The expected work of one group of demands that run together (module docstring).

    ``demand``: the label (``demands[i] (A-B)``) of the member needing the most simulated time;
    ``log_link_pairs`` and ``log_seconds``: natural logs of the group's link pairs and simulated
    seconds; ``pairs``: what the stop rule asks of that member, as text.
    """

    demand: str
    log_link_pairs: float
    log_seconds: float
    pairs: str
    log_link_pairs_serial: float = math.nan

    @property
    def link_pairs_serial(self) -> float:
        """The most the run should herald (members taking turns at all they share)."""
        value = self.log_link_pairs_serial
        if math.isnan(value):
            return self.link_pairs
        return math.inf if value > 709 else math.exp(value)

    @property
    def link_pairs(self) -> float:
        return math.inf if self.log_link_pairs > 709 else math.exp(self.log_link_pairs)

    @property
    def seconds(self) -> float:
        return math.inf if self.log_seconds > 709 else math.exp(self.log_seconds)

    def describe(self) -> str:
        """``about 2e+09 link pairs (about 4.6 days of engine time) and 3e+05 s simulated for 1 pair``."""
        engine_s = self.link_pairs / LINK_PAIRS_PER_S
        return (f"a run of {self.pairs} is expected to herald at least {self.link_pairs:.2g} link pairs "
                f"(about {describe_seconds(engine_s)} of engine time at ~{LINK_PAIRS_PER_S:g} per s) over "
                f"about {describe_seconds(self.seconds)} of simulated time")


def _chain_work(chain: Chain, cutoff_s: float | None, rounds: int) -> tuple[float, float]:
    q = [h.physics.round_success_probability for h in chain.hops]
    period = [h.physics.attempt_period_s for h in chain.hops]
    ready = [h.physics.herald_delay_s + max(chain.sites[i].memory_transfer_s, chain.sites[i + 1].memory_transfer_s)
             for i, h in enumerate(chain.hops)]
    swaps = [s.bsm_success_probability for s in chain.sites[1:-1]]
    shared = [s.communication_qubits == 1 for s in chain.sites[1:-1]]
    work = route_work(q, period, ready, swaps, cutoff_s, shared, rounds)
    return work.log_link_pairs, work.log_seconds


def _requested(chain: Chain, rule: StopRule | None) -> tuple[str, float, float | None]:
    """(text, pairs, time_s) the stop rule asks of ``chain``: pairs, or a simulated time."""
    if rule is None:
        if chain.duration_s is not None:
            return f"{chain.duration_s:g} simulated s", math.nan, float(chain.duration_s)
        pairs = int(chain.pairs or DEFAULT_DEMAND_PAIRS)
        return f"{pairs} pair(s)", float(pairs), None
    if rule.pairs is not None:
        return f"{rule.pairs} pair(s)", float(rule.pairs), None
    if rule.time_s is not None:
        return f"{rule.time_s:g} simulated s", math.nan, float(rule.time_s)
    needed = min(float(rule.max_pairs), max(20.0, (Z95 / float(rule.precision or 1.0)) ** 2))
    return f"about {needed:.0f} pairs (precision {rule.precision:g})", needed, None


def expected_work(chains: list[Chain], groups: list[list[int]], rule: StopRule | None,
                  cutoff_s: float | None, rounds: int) -> list[RunWork]:
    """The expected work of each group of ``chains`` (positions, as :func:`~netsim.engine.api._components`
    gives them) under ``rule`` (None: each demand's own pairs or duration).

    Two figures per group. ``log_link_pairs``, what the refusal reads, is the least work the run
    can take: every member heralds its own link pairs for its own pairs (or for the timed stop),
    as if nothing it shares slowed it. ``log_link_pairs_serial`` assumes the members take turns at
    everything they share, their simulated times adding up and every member heralding until the
    last is done: the most the run should take; the engine's guard reads it. On a generated
    10 x 10 grid (100 demands, 200 pairs each) the engine heralded 177,000 link pairs against
    172,000 least and 1.7e7 serial; on the bundled Vellmoor mesh (six demands crossing the same
    repeaters, 1500 pairs each) 224,000 against 38,000 least and 219,000 serial.
    """
    out = []
    for group in groups:
        per = []
        for k in group:
            log_e, log_t = _chain_work(chains[k], cutoff_s, rounds)
            text, pairs, time_s = _requested(chains[k], rule)
            need = math.log(time_s) if time_s is not None else math.log(pairs) + log_t
            per.append((need, log_e - log_t if math.isfinite(log_t) else math.inf, text, chains[k], time_s is None))
        _, _, text, slowest, _ = max(per, key=lambda item: item[0])
        # serial: demands that contend take turns, their simulated times add (a timed stop ends them all)
        timed = [item[0] for item in per if not item[4]]
        counted = [item[0] for item in per if item[4]]
        need = max([*timed, _logsumexp(counted)] if counted else timed)
        log_rate = _logsumexp([item[1] for item in per])
        least = _logsumexp([item[1] + item[0] if math.isfinite(item[0]) else math.inf for item in per])
        label = f"demands[{slowest.index}] ({slowest.name})"
        out.append(RunWork(label, least, need, text,
                           log_rate + need if math.isfinite(need) else math.inf))
    return out


def _logsumexp(values: list[float]) -> float:
    top = max(values)
    if not math.isfinite(top):
        return top
    return top + math.log(math.fsum(math.exp(v - top) for v in values))


def check_run_work(scenario: Scenario, works: list[RunWork], max_link_pairs: float) -> None:
    """Refuse (one line, :class:`~netsim.errors.ScenarioError`) a run whose worst group is expected
    to herald more than ``max_link_pairs`` link pairs."""
    if not works:
        return
    worst = max(works, key=lambda w: w.log_link_pairs)
    if worst.log_link_pairs > math.log(max_link_pairs):
        raise ScenarioError([Problem(worst.demand, (
            f"{worst.describe()}, above the limit of {max_link_pairs:.3g} link pairs per run; raise it with "
            "--max-link-pairs (run, sweep, design, sensitivity) to run anyway, or ask for fewer pairs"))], scenario.source)


def run_work_warnings(scenario: Scenario, works: list[RunWork],
                      max_link_pairs: float = DEFAULT_MAX_LINK_PAIRS) -> list[str]:
    """``check`` warnings: a run with the scenario's own stop rules beyond the default limit on
    link pairs, or needing more than a year of simulated time."""
    out = []
    for w in works:
        if w.log_link_pairs > math.log(max_link_pairs):
            out.append(f"{w.demand}: {w.describe()}; netsim run refuses it above {max_link_pairs:.3g} link pairs "
                       "unless --max-link-pairs is raised")
        elif w.log_seconds > math.log(SIMULATED_WARNING_S):
            out.append(f"{w.demand}: {w.describe()}; the figures describe a network that delivers "
                       "too slowly to be used")
    return out
