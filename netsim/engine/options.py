"""Protocol choices of an event-engine run (:class:`DesOptions`).

Kept apart from :mod:`netsim.engine.des` so that it stays an ordinary Python dataclass when the
engine is compiled (``netsim.engine.build``): a compiled class checks its fields' types exactly,
and options built from numpy values (a numpy integer for ``purification_rounds``, say) must work
the same in both builds. The engine converts what it reads.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from netsim.engine.policies import SchedulingPolicy, SwapPolicy

__all__ = ["DesOptions"]


@dataclass(frozen=True)
class DesOptions:
    """Protocol choices of an event-engine run (from :class:`netsim.scenario.model.Protocol`)."""

    cutoff_s: float | None = None
    purification: str = "none"
    purification_rounds: int = 0
    scheduling: str | SchedulingPolicy = "fair"
    swap_policy: str | SwapPolicy = "asap"
    log_pairs: bool = False
    #: Safety net: stop with a one-line error after heralding more link pairs than this
    #: (:mod:`netsim.engine.workload`); ``progress(count)`` is told every 4096 heralded pairs.
    max_link_pairs: float = math.inf
    progress: Callable[[int], None] | None = None
