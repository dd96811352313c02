"""netsim.qinfo: pure, batched quantum-information math on numpy arrays.

Knows nothing of networks. Functions take states of shape (..., d, d) and return arrays of
shape (...). Conventions (also in DEVELOPERS.md):

- Entropies and information in bits (log2).
- Depolarizing p: rho -> (1 - p) rho + p I/2. Dephasing p: off-diagonals times (1 - p).
- Amplitude damping gamma: K0 = [[1, 0], [0, sqrt(1 - gamma)]], K1 = [[0, sqrt(gamma)], [0, 0]].
- Erasure eps: output qutrit with flag level |e> (index 2).
- Memory decoherence: amplitude damping gamma = 1 - exp(-t/T1), then dephasing to a total
  coherence factor exp(-t/T2); T2 <= 2 T1.
- ``compose(a, b)`` applies ``a`` first.
- Qubit 0 is the left factor of ``numpy.kron``; Bell states Phi+- = (|00> +- |11>)/sqrt2,
  Psi+- = (|01> +- |10>)/sqrt2; Werner w |Phi+><Phi+| + (1 - w) I/4.
- Fidelity is the squared Uhlmann form.

Submodules (``states``, ``entropy``, ``channels``, ``entanglement``, ``operations``,
``capacity``, ``bounds``) hold a few more helpers, e.g. ``channels.decohere`` (batched memory
decoherence with one storage time per state), ``states.partial_trace``, ``bounds.qber``.
"""

from netsim.qinfo.bounds import key_fraction, plob_bound
from netsim.qinfo.capacity import holevo_capacity
from netsim.qinfo.channels import (
    Channel,
    amplitude_damping,
    compose,
    decohere,
    dephasing,
    depolarizing,
    erasure,
    memory_decoherence,
)
from netsim.qinfo.entanglement import (
    coherent_information,
    concurrence,
    entanglement_of_formation,
)
from netsim.qinfo.entropy import (
    binary_entropy,
    holevo_information,
    shannon_entropy,
    von_neumann_entropy,
)
from netsim.qinfo.operations import entanglement_swap, purify_bbpssw, purify_dejmps
from netsim.qinfo.states import bell_state, fidelity, werner_state

__all__ = [
    "Channel",
    "amplitude_damping",
    "bell_state",
    "binary_entropy",
    "coherent_information",
    "compose",
    "concurrence",
    "decohere",
    "dephasing",
    "depolarizing",
    "entanglement_of_formation",
    "entanglement_swap",
    "erasure",
    "fidelity",
    "holevo_capacity",
    "holevo_information",
    "key_fraction",
    "memory_decoherence",
    "plob_bound",
    "purify_bbpssw",
    "purify_dejmps",
    "shannon_entropy",
    "von_neumann_entropy",
    "werner_state",
]
