"""What each key of a scenario file may hold: type, allowed range and unit.

One :class:`Spec` per key. The loader checks every value against its spec and reports a problem
in the form ``<value> is not allowed; expected <allowed>``, where ``<allowed>`` is
:meth:`Spec.allowed`. Defaults are not kept here: they are the field defaults of the dataclasses
in :mod:`netsim.scenario.model`, so the contract and the loader cannot disagree.
"""

from __future__ import annotations

import difflib
import math
import numbers
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from netsim.errors import format_value
from netsim.scenario.profiles import profile_names
from netsim.scenario.model import (
    PURIFICATION_PROTOCOLS,
    ROUTING_POLICIES,
    SCHEDULING_POLICIES,
    SCHEMES,
    SITE_ROLES,
    SWAP_POLICIES,
)

__all__ = [
    "COSTS_FIELDS",
    "DEMAND_FIELDS",
    "LINK_DEFAULTABLE",
    "LINK_FIELDS",
    "NETWORK_FIELDS",
    "PROFILE_SPEC",
    "PROTOCOL_FIELDS",
    "SITE_DEFAULTABLE",
    "SITE_FIELDS",
    "Spec",
    "is_finite_number",
    "is_integer",
    "is_number",
]


def is_number(value: Any) -> bool:
    """True for int and float values (and numpy scalars), False for bool."""
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def is_finite_number(value: Any) -> bool:
    """A number (not bool) that is neither NaN nor infinite, nor an int too large for a float."""
    if not is_number(value):
        return False
    try:
        return math.isfinite(float(value))
    except OverflowError:
        return False


def is_integer(value: Any) -> bool:
    """True for int values (and numpy integers), False for bool and float."""
    return isinstance(value, numbers.Integral) and not isinstance(value, bool)


@dataclass(frozen=True)
class Spec:
    """The type and allowed range of one key.

    Parameters
    ----------
    kind : {"real", "int", "str", "choice", "bool"}
        ``real`` accepts int and float (never bool); ``int`` accepts integers only; ``bool``
        accepts ``true`` and ``false`` only.
    low, high : float, optional
        Bounds of a number; ``low_open``/``high_open`` exclude the bound itself.
    choices : tuple of str
        The allowed strings of a ``choice``.
    unit : str
        The unit shown in messages and in the reference (also part of the key name).
    required : bool
        Whether the key must be present (after ``[defaults]`` are applied).
    suggest : bool
        For a ``choice``: add the closest allowed string to the complaint (did you mean).
    """

    kind: str
    low: float | None = None
    high: float | None = None
    low_open: bool = False
    high_open: bool = False
    choices: tuple[str, ...] = ()
    unit: str = ""
    required: bool = False
    suggest: bool = False

    def allowed(self) -> str:
        """What is allowed, as a phrase: ``a number in (0, 1]``, ``one of 'a', 'b'``."""
        if self.kind == "choice":
            return "one of " + ", ".join(repr(c) for c in self.choices)
        if self.kind == "str":
            return "a non-empty string"
        if self.kind == "bool":
            return "true or false"
        noun = "an integer" if self.kind == "int" else "a number"
        text = noun + self._range_text()
        return f"{text} ({self.unit})" if self.unit else text

    def _range_text(self) -> str:
        lo, hi = self.low, self.high
        show = (lambda v: str(int(v))) if self.kind == "int" else (lambda v: f"{v:g}")  # 1000000, not 1e+06
        if lo is not None and hi is not None:
            left = "(" if self.low_open else "["
            right = ")" if self.high_open else "]"
            return f" in {left}{show(lo)}, {show(hi)}{right}"
        if lo is not None:
            return f" {'>' if self.low_open else '>='} {show(lo)}"
        if hi is not None:
            return f" {'<' if self.high_open else '<='} {show(hi)}"
        return ""

    def accepts(self, value: Any) -> bool:
        """Whether ``value`` has the right type and lies in the allowed range."""
        if self.kind == "choice":
            return isinstance(value, str) and value in self.choices
        if self.kind == "str":
            return isinstance(value, str) and value.strip() != ""
        if self.kind == "bool":
            return isinstance(value, bool)
        if self.kind == "int" and not is_integer(value):
            return False
        if not is_finite_number(value):
            return False
        return self._in_range(float(value))

    def _in_range(self, x: float) -> bool:
        if self.low is not None and (x < self.low or (self.low_open and x == self.low)):
            return False
        above = self.high is not None and (x > self.high or (self.high_open and x == self.high))
        return not above

    def complaint(self, value: Any) -> str:
        """The message for a value this spec does not accept."""
        if self.kind == "int" and isinstance(value, float) and math.isfinite(value):
            # shown as written: "4 is not allowed; expected an integer" would puzzle the reader
            return f"{value!r} is not allowed; expected {self.allowed()}, written without a decimal point"
        if self.kind == "choice" and self.suggest and isinstance(value, str):
            close = difflib.get_close_matches(value, list(self.choices), n=1, cutoff=0.5)
            if close:
                return f"{format_value(value)} is not allowed; did you mean {close[0]!r}? expected {self.allowed()}"
        return f"{format_value(value)} is not allowed; expected {self.allowed()}"

    def convert(self, value: Any) -> Any:
        """An accepted value as a plain Python object (float for ``real``, int for ``int``)."""
        if self.kind == "real":
            return float(value)
        if self.kind == "int":
            return int(value)
        return value


def _prob(low_open: bool = False, high_open: bool = False) -> Spec:
    return Spec("real", 0.0, 1.0, low_open=low_open, high_open=high_open)


def _positive(unit: str) -> Spec:
    return Spec("real", 0.0, None, low_open=True, unit=unit)


#: ``profile = "NAME"``: one of the bundled hardware profiles (``netsim profiles`` lists them).
PROFILE_SPEC = Spec("choice", choices=profile_names(), suggest=True)

NETWORK_FIELDS: Mapping[str, Spec] = {
    "name": Spec("str", required=True),
    "purpose": Spec("str"),
}

#: Keys of a ``[[sites]]`` table. ``memory_slots`` may be 0 only at a switch (checked apart).
SITE_FIELDS: Mapping[str, Spec] = {
    "name": Spec("str", required=True),
    "role": Spec("choice", choices=SITE_ROLES, required=True),
    "x_km": Spec("real", unit="km"),
    "y_km": Spec("real", unit="km"),
    # upper ends: far beyond any memory, interface count or mode number built (thousands of
    # temporal modes in rare-earth memories; common practice), so a typo like 1e308 is refused
    "memory_slots": Spec("int", 0, 100_000),
    "t1_s": _positive("s"),
    "t2_s": _positive("s"),
    "emission_efficiency": _prob(low_open=True),
    "memory_efficiency": _prob(low_open=True),
    # 0.01: a linear-optics Bell-state measurement (1/2) with detectors of 14 % efficiency; below
    # it a swap almost never succeeds and the cut-off estimate would sample for minutes
    "bsm_success_probability": Spec("real", 0.01, 1.0),
    "gate_error": _prob(),
    "attempt_prep_time_s": Spec("real", 0.0, None, unit="s"),
    "communication_qubits": Spec("int", 1, 100_000),
    "memory_transfer_s": Spec("real", 0.0, None, unit="s"),
    "memory_transfer_error": _prob(),
    "photon_indistinguishability": _prob(),
    "attempt_dephasing": _prob(),
    "profile": PROFILE_SPEC,
    "candidate": Spec("bool"),
    "cost": Spec("real", 0.0, None),
}

#: Keys of a ``[[links]]`` table (``ends`` is checked apart: two site names).
LINK_FIELDS: Mapping[str, Spec] = {
    # 0.1 m of patch fibre to the Earth's circumference: a 5e-324 km fibre is no fibre (common practice)
    "length_km": Spec("real", 1e-4, 40_000.0, unit="km", required=True),
    "attenuation_db_per_km": Spec("real", 0.0, None, unit="dB/km"),
    "extra_loss_db": Spec("real", 0.0, None, unit="dB"),
    "scheme": Spec("choice", choices=SCHEMES),
    "modes": Spec("int", 1, 1_000_000),
    "detector_efficiency": _prob(low_open=True),
    "dark_count_probability": _prob(high_open=True),
    "midpoint_fraction": _prob(),
    "bright_state_population": _prob(low_open=True, high_open=True),
    "pair_probability": _prob(low_open=True, high_open=True),
    # rms phase error; beyond a few rad no coherence is left (exp(-sigma^2 / 2) = 2e-22 at 10 rad)
    "phase_noise_rad": Spec("real", 0.0, 10.0, unit="rad"),
    "profile": PROFILE_SPEC,
    "candidate": Spec("bool"),
    "cost": Spec("real", 0.0, None),
}

#: Keys of a ``[[demands]]`` table (``users`` is checked apart: two site names).
DEMAND_FIELDS: Mapping[str, Spec] = {
    "pairs": Spec("int", 1, None),
    "duration_s": _positive("s"),
    "min_fidelity": _prob(),
    "min_rate_per_s": Spec("real", 0.0, None, unit="1/s"),
}

#: Keys of the ``[costs]`` table: prices in the unit named by ``currency`` (a label).
COSTS_FIELDS: Mapping[str, Spec] = {
    "currency": Spec("str"),
    "fibre_per_km": Spec("real", 0.0, None),
    "repeater_site": Spec("real", 0.0, None),
    "user_site": Spec("real", 0.0, None),
    "memory_slot": Spec("real", 0.0, None),
    "mode": Spec("real", 0.0, None),
    "detector": Spec("real", 0.0, None),
    "heralding_station": Spec("real", 0.0, None),
}

PROTOCOL_FIELDS: Mapping[str, Spec] = {
    "routing": Spec("choice", choices=ROUTING_POLICIES),
    "swap_policy": Spec("choice", choices=SWAP_POLICIES),
    "scheduling": Spec("choice", choices=SCHEDULING_POLICIES),
    "cutoff_s": _positive("s"),
    "purification": Spec("choice", choices=PURIFICATION_PROTOCOLS),
    # ten rounds take 2^10 link pairs per purified pair: more is never a plan (common practice)
    "purification_rounds": Spec("int", 0, 10),
}

#: Site keys that ``[defaults.site]`` may set.
SITE_DEFAULTABLE: Mapping[str, Spec] = {
    k: v for k, v in SITE_FIELDS.items() if k not in ("name", "role", "x_km", "y_km", "candidate", "cost")
}
#: Link keys that ``[defaults.link]`` may set.
LINK_DEFAULTABLE: Mapping[str, Spec] = {k: v for k, v in LINK_FIELDS.items() if k not in ("candidate", "cost")}
