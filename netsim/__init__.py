"""netsim: planning estimates for metropolitan quantum networks.

Layers, lowest first: ``qinfo`` (pure math), ``scenario`` (TOML files), ``hardware`` (per-link
physics), ``network`` (graph, budgets, bounds), ``engine`` (discrete-event simulation), ``sweep``
(parameter sweeps and the result store), ``report`` (tables and figures), ``cli``.
"""

from netsim.errors import NetsimError, ParameterError, ScenarioError, StoreError

__version__ = "0.1.0"

__all__ = ["NetsimError", "ParameterError", "ScenarioError", "StoreError", "__version__"]
