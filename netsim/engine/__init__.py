"""netsim.engine: discrete-event simulation of Bell pairs and qubit ensembles.

``run(scenario, *, pairs=None, time_s=None, precision=None, seed=0) -> RunResult`` simulates every
demand of a scenario; ``simulate(chains, rule=..., seed=..., options=...)`` runs chains built by
hand (tests, benchmarks). See :mod:`netsim.engine.des` for the model, :mod:`netsim.engine.vector`
for the fast path, :mod:`netsim.engine.history` for the batched state algebra,
:mod:`netsim.engine.policies` for the scheduling and swap plug-ins and
:mod:`netsim.engine.ensemble` for qubit ensembles.
"""

# first: choosing the compiled or the plain event engine must precede importing it (build.py)
from netsim.engine.build import BUILD
from netsim.engine.api import chains_from_scenario, simulate, stop_rule
from netsim.engine.api import run as run
from netsim.engine.chain import Chain, HopSpec, synthetic_physics
from netsim.engine.des import DesOptions, simulate_des
from netsim.engine.ensemble import EnsembleResult, send_ensemble
from netsim.engine.history import History, pair_states
from netsim.engine.metrics import ChainRun, StopRule
from netsim.engine.result import RunResult
from netsim.engine.vector import simulate_chain_vector

__all__ = ["BUILD", "Chain", "ChainRun", "DesOptions", "EnsembleResult", "History", "HopSpec", "RunResult", "StopRule",
           "chains_from_scenario", "pair_states", "run", "send_ensemble", "simulate", "simulate_chain_vector",
           "simulate_des", "stop_rule", "synthetic_physics"]
