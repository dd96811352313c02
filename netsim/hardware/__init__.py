"""netsim.hardware: fibre, heralding schemes and detectors -> :class:`LinkPhysics`.

``link_physics(link, site_a, site_b)`` dispatches on ``link.scheme``; ``fibre.qubit_channel`` is
the one channel model of a qubit sent through fibre. See DEVELOPERS.md for the contract.
"""

from netsim.hardware.lightpath import LightPath
from netsim.hardware.schemes import (
    direct,
    link_physics,
    midpoint_source,
    path_physics,
    single_photon,
    two_photon,
)
from netsim.hardware.types import LinkPhysics

__all__ = [
    "LightPath",
    "LinkPhysics",
    "direct",
    "link_physics",
    "midpoint_source",
    "path_physics",
    "single_photon",
    "two_photon",
]
