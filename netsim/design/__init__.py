"""netsim.design: price a network, choose candidate sites and links at least cost, import fibre maps.

- :func:`network_cost` prices a scenario from its ``[costs]`` table (one row per site and link).
- :func:`route_estimate` is the one closed-form estimate of a route's rate and fidelity the
  design uses.
- :func:`design_network` formulates and solves the mixed-integer linear program over candidate
  routes (after Rabbie, Chakraborty, Avis & Wehner, npj Quantum Inf. 8, 5, 2022) with
  ``scipy.optimize.milp`` (HiGHS).
- :func:`import_fibre_map` turns GeoJSON, GraphML or a pair of CSV tables into a scenario.
"""

from netsim.design.costs import CostRow, cost_table, network_cost
from netsim.design.estimate import RouteEstimate, route_estimate

from netsim.design.fibremap import import_fibre_map
from netsim.design.milp import Design, DesignOptions, design_network

__all__ = [
    "CostRow",
    "Design",
    "DesignOptions",
    "RouteEstimate",
    "cost_table",
    "design_network",
    "import_fibre_map",

    "network_cost",
    "route_estimate",
]
