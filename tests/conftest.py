"""Shared fixtures and invariant checkers, written once and reused by every test file.

Checkers (import them with ``from conftest import assert_valid_state`` or use the fixtures of
the same name):

- :func:`assert_valid_state`: Hermitian, positive semidefinite, trace 1 (batched).
- :func:`assert_probability`: values in [0, 1].
- :func:`assert_within_bound`: simulated values never above their bound (up to a tolerance).

Fixtures: ``rng`` (a seeded ``numpy.random.Generator``), ``random_states`` (a factory of random
density matrices with a fixed seed).
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from typing import Any

import numpy as np
import pytest
from hypothesis import settings

from netsim.qinfo.states import random_density_matrices

# Under CI every property test draws the same examples on every run, so a red build can always
# be reproduced; locally hypothesis keeps exploring new examples.
settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")


def pytest_report_header() -> str:
    from netsim.engine import BUILD

    return f"netsim event engine: {BUILD} (netsim/engine/build.py)"


def assert_valid_state(rho: Any, atol: float = 1e-10) -> None:
    """Fail unless every state in the batch is Hermitian, positive semidefinite, of trace 1.

    Parameters
    ----------
    rho : array of shape (..., d, d)
    atol : float
        Absolute tolerance on the Hermiticity defect, the most negative eigenvalue and the trace.
    """
    r = np.asarray(rho, dtype=complex)
    assert r.ndim >= 2 and r.shape[-1] == r.shape[-2], f"not square: shape {r.shape}"
    assert np.all(np.isfinite(r)), "state has non-finite entries"
    herm = np.max(np.abs(r - np.conj(np.swapaxes(r, -1, -2))), initial=0.0)
    assert herm <= atol, f"not Hermitian: max |rho - rho^dagger| = {herm:.3g}"
    trace = np.trace(r, axis1=-2, axis2=-1)
    assert np.max(np.abs(trace - 1.0), initial=0.0) <= atol, f"trace not 1: {trace.ravel()[:4]}"
    min_eig = np.min(np.linalg.eigvalsh((r + np.conj(np.swapaxes(r, -1, -2))) / 2), initial=0.0)
    assert min_eig >= -atol, f"not positive: smallest eigenvalue {min_eig:.3g}"


def assert_probability(values: Any, atol: float = 0.0) -> None:
    """Fail unless all values are finite and lie in [0, 1] (within ``atol``)."""
    v = np.asarray(values, dtype=float)
    assert np.all(np.isfinite(v)), "non-finite probability"
    assert np.all(v >= -atol) and np.all(v <= 1.0 + atol), f"outside [0, 1]: {v[(v < -atol) | (v > 1 + atol)][:4]}"


def assert_within_bound(values: Any, bound: Any, rtol: float = 1e-9, atol: float = 1e-12) -> None:
    """Fail if any value exceeds its bound by more than ``atol + rtol * |bound|``."""
    v, b = np.broadcast_arrays(np.asarray(values, dtype=float), np.asarray(bound, dtype=float))
    excess = v - b - (atol + rtol * np.abs(b))
    assert np.all(excess <= 0), f"value above its bound: {v[excess > 0][:4]} > {b[excess > 0][:4]}"


@pytest.fixture
def rng() -> np.random.Generator:
    """A seeded generator (seed 12345) so every run sees the same numbers."""
    return np.random.default_rng(12345)


@pytest.fixture
def random_states() -> Callable[..., np.ndarray]:
    """Factory ``random_states(n, d=4, seed=0, rank=None)`` of random density matrices."""
    return random_density_matrices


@pytest.fixture(name="valid_state")
def _valid_state_fixture() -> Callable[..., None]:
    """The :func:`assert_valid_state` checker as a fixture."""
    return assert_valid_state


def assert_agrees_with_record(result: Any, ref: dict[str, Any], z: float,
                              link_tolerance: Callable[[dict[str, Any], float, float], float] | None = None) -> None:
    """A run's figures agree with ones recorded from another seed (and an earlier engine):
    rates and mean fidelities within ``z`` combined standard errors (the 95 % intervals read as
    +-1.96 sigma; normal approximation, common practice); site occupancy within ``2 z`` times the
    worst demand's relative rate error (occupancy is throughput x time held); link utilisation
    within ``link_tolerance(link, that tolerance, worst relative rate error)`` (default: the same).
    A lone chain recorded on the event engine may now run on the vectorised one."""
    def se(ci: list[float]) -> float:
        return (ci[1] - ci[0]) / 2 / 1.96

    rel_rate = []
    for row in result.demands:
        old = ref["demands"][row["demand"]]
        if "hops" in old:
            assert row["hops"] == old["hops"]
        assert row["engine"] == old["engine"] or row["engine"] == "vector"
        for key, ci in (("rate_per_s", "rate_ci95"), ("fidelity_mean", "fidelity_ci95")):
            both = math.hypot(se(row[ci]), se(old[ci]))
            assert abs(row[key] - old[key]) <= z * both + 1e-12, (row["demand"], key, row[key], old[key], both)
        rel_rate.append(se(row["rate_ci95"]) / row["rate_per_s"])
    tol = 2 * z * max(rel_rate)
    for site in result.sites:
        old = ref["sites"][site["site"]]
        assert abs(site["memory_occupancy"] - old) <= tol * max(old, 1e-3), (site["site"], site["memory_occupancy"], old)
    for link in result.links:
        old = ref["links"][link["link"]]
        link_tol = tol if link_tolerance is None else link_tolerance(link, tol, max(rel_rate))
        assert abs(link["utilisation"] - old) <= link_tol * max(old, 1e-3), (link["link"], link["utilisation"], old)


def qutip_swap(rho_1: np.ndarray, rho_2: np.ndarray, gate_error: float = 0.0) -> np.ndarray:
    """QuTiP reference for the entanglement swap of pairs (A, B1) and (B2, C): project (B1, B2) on
    each Bell state, apply the Pauli correction on C (Phi+ I, Phi- Z, Psi+ X, Psi- Y), trace out
    B1 B2 and sum the outcomes (Zukowski et al., PRL 71, 4287 (1993)). ``gate_error`` q first
    depolarizes (B1, B2) as the average of the sixteen two-qubit Paulis (rho -> (1 - q) rho +
    q/16 sum_P P rho P, which is (1 - q) rho + q I/4 (x) tr_{B1 B2} rho; Nielsen & Chuang 2010,
    Sec. 8.3.4, memory)."""
    import qutip

    from netsim import qinfo

    paulis = [qutip.qeye(2), qutip.sigmaz(), qutip.sigmax(), qutip.sigmay()]
    dims = [[2, 2], [2, 2]]
    total = qutip.tensor(qutip.Qobj(rho_1, dims=dims), qutip.Qobj(rho_2, dims=dims))  # A, B1, B2, C
    if gate_error > 0:
        twirled = 0
        for p1 in paulis:
            for p2 in paulis:
                op = qutip.tensor(qutip.qeye(2), p1, p2, qutip.qeye(2))
                twirled = twirled + op * total * op.dag() / 16
        total = (1 - gate_error) * total + gate_error * twirled
    out = 0
    for name, pauli in zip(["phi+", "phi-", "psi+", "psi-"], paulis):
        proj = qutip.tensor(qutip.qeye(2), qutip.Qobj(qinfo.bell_state(name), dims=dims), qutip.qeye(2))
        fix = qutip.tensor(qutip.qeye(2), qutip.qeye(2), qutip.qeye(2), pauli)
        out = out + (fix * proj * total * proj * fix.dag()).ptrace([0, 3])
    return out.full()
