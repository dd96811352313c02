"""netsim.scenario: TOML scenario files -> validated, immutable objects.

``load(path)`` reads a file; ``load_data(mapping, source=None)`` validates an already parsed
mapping (sweeps use it to apply overrides). Both raise :class:`netsim.errors.ScenarioError`
listing every problem as ``key.path: message``. See DEVELOPERS.md for this layer's contract and
scenarios/REFERENCE.md for every key, unit, default and allowed range.
"""

from netsim.scenario.loader import TOP_LEVEL_KEYS, content_hash, load, load_data
from netsim.scenario.model import Costs, Demand, Encoding, Link, Protocol, Scenario, Site

__all__ = [
    "TOP_LEVEL_KEYS",
    "Costs",
    "Demand",
    "Encoding",
    "Link",
    "Protocol",
    "Scenario",
    "Site",
    "content_hash",
    "load",
    "load_data",
]
