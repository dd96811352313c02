"""Qubit channels as Kraus operators, applied batched to one qubit of a state.

Conventions (shared by every layer, see DEVELOPERS.md):

- Depolarizing p: rho -> (1 - p) rho + p I/2 (p = 1 fully mixes).
- Dephasing p: rho -> (1 - p) rho + p diag(rho), i.e. off-diagonal elements times (1 - p)
  (p = 1 fully dephases); equivalently Z is applied with probability p/2.
- Amplitude damping gamma: K0 = [[1, 0], [0, sqrt(1 - gamma)]], K1 = [[0, sqrt(gamma)], [0, 0]]
  (|1> decays to |0>); transmissivity eta = 1 - gamma.
- Erasure eps: with probability eps the qubit is replaced by a flag state |e>; the output is a
  qutrit (levels |0>, |1>, |e>).
- Memory decoherence for time t with T1, T2 (T2 the total coherence time, T2 <= 2 T1):
  amplitude damping gamma = 1 - exp(-t/T1), then dephasing so that the total coherence factor
  is exp(-t/T2).
- ``compose(a, b, c)`` applies ``a`` first, then ``b``, then ``c`` (left to right).

How to add a channel: write a function that checks its parameters with :func:`_probability`
(or raises ``ParameterError`` itself) and returns ``Channel(name, kraus, params)`` with Kraus
operators of shape (k, d_out, 2) satisfying sum_k K^dagger K = I; add it to ``__all__`` here
and in ``netsim/qinfo/__init__.py``; the shared property tests in ``tests/test_qinfo_channels.py``
(trace preservation, positivity, QuTiP agreement) pick it up from ``CHANNEL_FACTORIES`` there.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from netsim.errors import ParameterError, checked_number, probability
from netsim.qinfo.states import as_states

__all__ = [
    "Channel",
    "amplitude_damping",
    "compose",
    "decoherence_factors",
    "decohere",
    "dephasing",
    "depolarizing",
    "erasure",
    "memory_decoherence",
]

_I = np.eye(2, dtype=complex)
_X = np.array([[0, 1], [1, 0]], dtype=complex)
_Y = np.array([[0, -1j], [1j, 0]], dtype=complex)
_Z = np.array([[1, 0], [0, -1]], dtype=complex)


@dataclass(frozen=True, eq=False)
class Channel:
    """A quantum channel on one qubit given by its Kraus operators.

    Attributes
    ----------
    name : str
        Human-readable name with parameters, e.g. ``"depolarizing(p=0.1)"``.
    kraus : numpy.ndarray
        Kraus operators, shape (k, d_out, d_in) with d_in = 2; sum_k K^dagger K = I.
    params : dict
        The parameters the channel was built from.
    """

    name: str
    kraus: NDArray[np.complex128]
    params: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        kraus = np.asarray(self.kraus, dtype=complex)
        if kraus.ndim != 3 or kraus.shape[-1] < 1:
            raise ParameterError("kraus", f"array of shape {kraus.shape}", "an array of shape (k, d_out, d_in)")
        defect = np.abs(np.einsum("kji,kjl->il", kraus.conj(), kraus) - np.eye(kraus.shape[-1])).max()
        if defect > 1e-9:
            raise ParameterError("kraus", f"operators with |sum K^dagger K - I| = {defect:.3g}",
                                 "a trace-preserving set (sum K^dagger K = I within 1e-9)")
        object.__setattr__(self, "kraus", kraus)

    @property
    def d_in(self) -> int:
        """Input dimension."""
        return int(self.kraus.shape[-1])

    @property
    def d_out(self) -> int:
        """Output dimension (3 for the erasure channel, else 2)."""
        return int(self.kraus.shape[-2])

    def apply(self, rho: ArrayLike, qubit: int = 0, dims: tuple[int, ...] | None = None) -> NDArray[np.complex128]:
        """Apply the channel to subsystem ``qubit`` of ``rho`` (batched over leading axes).

        Parameters
        ----------
        rho : array of shape (..., D, D)
            A single-qubit state (D = 2) or a multi-qubit state; qubit 0 is the left factor
            of ``numpy.kron``.
        qubit : int
            Which subsystem the channel acts on.
        dims : tuple of int, optional
            Subsystem dimensions when they are not all 2 (e.g. after an erasure).

        Returns
        -------
        numpy.ndarray
            Shape (..., D', D') with D' = D d_out / d_in.
        """
        r = as_states(rho)
        dims_t = _dims_of(r.shape[-1], dims)
        if not (0 <= int(qubit) < len(dims_t)):
            raise ParameterError("qubit", qubit, f"an index in [0, {len(dims_t) - 1}]")
        if dims_t[qubit] != self.d_in:
            raise ParameterError("qubit", qubit, f"a subsystem of dimension {self.d_in}")
        before = int(np.prod(dims_t[:qubit]))
        after = int(np.prod(dims_t[qubit + 1:]))
        batch = r.shape[:-2]
        t = r.reshape(batch + (before, self.d_in, after, before, self.d_in, after))
        k = self.kraus
        out = np.einsum("kxi,...aibcjd,kyj->...axbcyd", k, t, k.conj(), optimize=True)
        d_new = before * self.d_out * after
        return out.reshape(batch + (d_new, d_new))

    def __repr__(self) -> str:
        return f"Channel({self.name})"


def _dims_of(d: int, dims: tuple[int, ...] | None) -> tuple[int, ...]:
    if dims is not None:
        dims_t = tuple(int(x) for x in dims)
        if int(np.prod(dims_t)) != d:
            raise ParameterError("dims", dims, f"subsystem dimensions whose product is {d}")
        return dims_t
    n = round(math.log2(d)) if d > 0 else -1
    if n < 1 or 2**n != d:
        raise ParameterError("rho", f"matrix of size {d}", "a state of n qubits (size a power of 2), or pass dims")
    return (2,) * n



def depolarizing(p: float) -> Channel:
    """Depolarizing channel rho -> (1 - p) rho + p I/2, p in [0, 1].

    Kraus operators sqrt(1 - 3p/4) I, sqrt(p/4) X, sqrt(p/4) Y, sqrt(p/4) Z.

    References
    ----------
    M. A. Nielsen and I. L. Chuang, Quantum Computation and Quantum Information (2010), Sec. 8.3.4.
    """
    p = probability("p", p)
    kraus = np.stack([math.sqrt(1 - 3 * p / 4) * _I, math.sqrt(p / 4) * _X,
                      math.sqrt(p / 4) * _Y, math.sqrt(p / 4) * _Z]).astype(complex)
    return Channel(f"depolarizing(p={p:g})", kraus, {"p": p})


def dephasing(p: float) -> Channel:
    """Dephasing channel rho -> (1 - p) rho + p diag(rho), p in [0, 1].

    Off-diagonal elements are multiplied by 1 - p; p = 1 fully dephases. Kraus operators
    sqrt(1 - p/2) I and sqrt(p/2) Z (a phase flip with probability p/2).
    """
    p = probability("p", p)
    kraus = np.stack([math.sqrt(1 - p / 2) * _I, math.sqrt(p / 2) * _Z]).astype(complex)
    return Channel(f"dephasing(p={p:g})", kraus, {"p": p})


def amplitude_damping(gamma: float) -> Channel:
    """Amplitude damping: |1> decays to |0> with probability gamma in [0, 1].

    K0 = [[1, 0], [0, sqrt(1 - gamma)]], K1 = [[0, sqrt(gamma)], [0, 0]]. For a photon in fibre,
    gamma = 1 - eta with eta the transmissivity (|1> = one photon, |0> = vacuum).

    References
    ----------
    M. A. Nielsen and I. L. Chuang, Quantum Computation and Quantum Information (2010), Sec. 8.3.5.
    """
    g = probability("gamma", gamma)
    kraus = np.array([[[1, 0], [0, math.sqrt(1 - g)]], [[0, math.sqrt(g)], [0, 0]]], dtype=complex)
    return Channel(f"amplitude_damping(gamma={g:g})", kraus, {"gamma": g})


def erasure(eps: float) -> Channel:
    """Erasure channel: with probability eps the qubit is replaced by the flag |e>.

    The output is a qutrit with levels |0>, |1>, |e>: rho -> (1 - eps) rho (+) eps |e><e|.
    Kraus operators (shape (3, 3, 2)): sqrt(1 - eps) [I; 0], sqrt(eps) |e><0|, sqrt(eps) |e><1|.

    References
    ----------
    C. H. Bennett, D. P. DiVincenzo and J. A. Smolin, "Capacities of quantum erasure channels",
    Phys. Rev. Lett. 78, 3217 (1997).
    """
    e = probability("eps", eps)
    kraus = np.zeros((3, 3, 2), dtype=complex)
    kraus[0, 0, 0] = kraus[0, 1, 1] = math.sqrt(1 - e)
    kraus[1, 2, 0] = kraus[2, 2, 1] = math.sqrt(e)
    return Channel(f"erasure(eps={e:g})", kraus, {"eps": e})


def compose(*channels: Channel) -> Channel:
    """The channel that applies ``channels`` in order, left to right (first argument first).

    ``compose(a, b).apply(rho) == b.apply(a.apply(rho))``. The Kraus operators are all
    products K_b K_a (k_a k_b of them).

    Examples
    --------
    >>> import numpy as np
    >>> ch = compose(amplitude_damping(0.5), depolarizing(0.2))
    >>> out = ch.apply(np.diag([0.0, 1.0]))   # |1><1| decays halfway, then is depolarized
    >>> np.round(out.real, 12).tolist()
    [[0.5, 0.0], [0.0, 0.5]]

    Raises
    ------
    ParameterError
        If no channel is given or an output dimension does not match the next input dimension.
    """
    if not channels:
        raise ParameterError("channels", "()", "at least one Channel")
    kraus = channels[0].kraus
    for index, ch in enumerate(channels[1:], start=1):
        if ch.d_in != kraus.shape[-2]:
            raise ParameterError(f"channels[{index}]", ch.name,
                                 f"a channel with input dimension {kraus.shape[-2]}")
        kraus = np.einsum("bij,ajk->baik", ch.kraus, kraus).reshape(-1, ch.d_out, kraus.shape[-1])
    name = " then ".join(ch.name for ch in channels)
    return Channel(name, kraus, {"channels": [ch.name for ch in channels]})


def decoherence_factors(t_s: ArrayLike, t1_s: float, t2_s: float) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """(gamma, coherence factor) of :func:`memory_decoherence` after ``t_s`` (batched), checking
    the parameters as it does: gamma = 1 - exp(-t/T1), coherence exp(-t/T2)."""
    return _memory_factors(t_s, t1_s, t2_s)


def _memory_factors(t_s: ArrayLike, t1_s: float, t2_s: float) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """(gamma, coherence factor) of memory decoherence, checking the parameters."""
    t = np.asarray(t_s, dtype=float)
    if np.any(~(t >= 0)) or np.any(np.isinf(t)):
        raise ParameterError("t_s", float(t[~((t >= 0) & np.isfinite(t))].flat[0]), "a finite time >= 0 in seconds")
    t1 = _positive_time("t1_s", t1_s)
    t2 = _positive_time("t2_s", t2_s)
    if t2 > 2 * t1:
        raise ParameterError("t2_s", t2_s, f"a time <= 2 * t1_s = {2 * t1:g} s (T2 <= 2 T1)")
    with np.errstate(over="ignore"):  # t / T2 beyond the largest float (T2 = 5e-324 s): exp(-inf) = 0
        gamma = -np.expm1(-t / t1)
        coherence = np.exp(-t / t2)
    return gamma, coherence



def memory_decoherence(t_s: float, t1_s: float, t2_s: float) -> Channel:
    """Decoherence of a stored qubit during ``t_s`` seconds.

    Amplitude damping with gamma = 1 - exp(-t/T1), followed by dephasing so that the total
    coherence factor is exp(-t/T2): the dephasing multiplies off-diagonals by
    exp(-t/T2) / exp(-t/(2 T1)). Equals the Lindblad model with decay rate 1/T1 and pure
    dephasing rate 1/T2 - 1/(2 T1).

    Parameters
    ----------
    t_s : float
        Storage time in seconds (>= 0).
    t1_s, t2_s : float
        Energy relaxation time and total coherence time in seconds (> 0, ``inf`` allowed);
        T2 <= 2 T1 is required for a physical channel.

    Raises
    ------
    ParameterError
        Negative or non-finite time, non-positive T1 or T2, or T2 > 2 T1.
    """
    gamma, coherence = _memory_factors(t_s, t1_s, t2_s)
    g, c = float(gamma), float(coherence)
    residual = 1.0 - c / math.sqrt(1.0 - g) if g < 1.0 else 1.0
    channel = compose(amplitude_damping(g), dephasing(min(max(residual, 0.0), 1.0)))
    return Channel(f"memory_decoherence(t_s={float(t_s):g}, t1_s={float(t1_s):g}, t2_s={float(t2_s):g})",
                   channel.kraus, {"t_s": float(t_s), "t1_s": float(t1_s), "t2_s": float(t2_s)})


def decohere(rho: ArrayLike, t_s: ArrayLike, t1_s: float, t2_s: float, qubit: int = 0) -> NDArray[np.complex128]:
    """Apply :func:`memory_decoherence` to qubit ``qubit`` of qubit states, batched over ``t_s``.

    Closed form in the computational basis of the target qubit: populations
    rho_00 += gamma rho_11, rho_11 *= 1 - gamma, coherences rho_01 *= exp(-t/T2), with
    gamma = 1 - exp(-t/T1). ``t_s`` broadcasts against the batch shape of ``rho``, so each state
    can have its own storage time. Much faster than building a channel per time.

    Parameters
    ----------
    rho : array of shape (..., 2^n, 2^n)
    t_s : float or array broadcastable to rho.shape[:-2]
        Storage times in seconds (>= 0).
    t1_s, t2_s : float
        As in :func:`memory_decoherence`.
    qubit : int
        The stored qubit (0 is the left factor of ``kron``).
    """
    r = as_states(rho)
    dims = _dims_of(r.shape[-1], None)
    if not (0 <= int(qubit) < len(dims)):
        raise ParameterError("qubit", qubit, f"an index in [0, {len(dims) - 1}]")
    gamma, coh = _memory_factors(t_s, t1_s, t2_s)
    before, after = 2**qubit, 2 ** (len(dims) - qubit - 1)
    batch = np.broadcast_shapes(r.shape[:-2], gamma.shape)
    t = np.broadcast_to(r, batch + r.shape[-2:]).reshape(batch + (before, 2, after, before, 2, after))
    g = gamma.reshape(gamma.shape + (1,) * 4)
    c = coh.reshape(coh.shape + (1,) * 4)
    out = np.empty_like(t)
    out[..., 0, :, :, 0, :] = t[..., 0, :, :, 0, :] + g * t[..., 1, :, :, 1, :]
    out[..., 1, :, :, 1, :] = (1.0 - g) * t[..., 1, :, :, 1, :]
    out[..., 0, :, :, 1, :] = c * t[..., 0, :, :, 1, :]
    out[..., 1, :, :, 0, :] = c * t[..., 1, :, :, 0, :]
    return out.reshape(batch + r.shape[-2:])


def _positive_time(name: str, value: Any) -> float:
    return checked_number(name, value, "a time > 0 in seconds (inf allowed)", lambda x: x > 0)
