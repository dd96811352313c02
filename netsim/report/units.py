"""Headers with units for every metric a report shows, and the 95 % intervals behind them.

Keys follow the project's naming (unit in the name). A header is what a reader sees; it always
carries the unit. Unknown keys fall back to the key itself, which already names its unit.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

__all__ = ["HEADERS", "binomial_ci95", "combine_ci95", "header", "mean_ci95", "param_label", "param_value_label", "poisson_rate_ci95"]

HEADERS: dict[str, str] = {
    "rate_per_s": "delivered rate (pairs/s)",
    "rate_ci95": "rate 95% CI (pairs/s)",
    "fidelity_mean": "fidelity",
    "fidelity_ci95": "fidelity 95% CI",
    "eof_mean": "EoF (ebit/pair)",
    "eof_of_mean_state": "EoF of mean state (ebit/pair)",
    "ebits_per_s": "ebits/s (EoF x rate)",
    "coherent_information_mean": "coherent info (bit/pair)",
    "key_fraction": "key fraction (bit/pair)",
    "key_rate_per_s": "key rate (bit/s)",
    "holevo_bits_per_s": "Holevo information rate (bit/s)",
    "holevo_bits_per_qubit": "Holevo information (bit/qubit)",
    "delivered_pairs": "pairs delivered",
    "simulated_time_s": "simulated time (s)",
    "utilisation": "utilisation",
    "loss_db": "loss (dB)",
    "length_km": "length (km)",
    "transmissivity": "transmissivity",
    "plob_bits_per_use": "repeaterless bound (ebit/use)",
    "plob_bits_per_s": "repeaterless bound (ebit/s)",
    "bound_single_path_per_s": "single-path bound (ebit/s)",
    "bound_multipath_per_s": "multipath bound (ebit/s)",
    "rate_to_bound": "rate / bound",
}


#: Unit suffixes of key names and how an axis shows them (longest suffix first).
_UNIT_SUFFIXES = (("_db_per_km", "dB/km"), ("_per_s", "1/s"), ("_km", "km"), ("_db", "dB"),
                  ("_s", "s"))


#: Longest axis label kept on one line (characters; a column-wide figure at 8 pt holds about 55).
LABEL_WIDTH = 40


def param_label(path: str) -> str:
    """An axis label for a swept key path, unit in brackets and scope after a comma:
    ``"sites[role=repeater].t2_s"`` -> ``"t2 (s), sites[role=repeater]"``."""
    scope, _, key = path.rpartition(".")
    name, unit = _split_unit(key)
    text = name.replace("_", " ") + (f" ({unit})" if unit else "")
    if not scope or scope in ("defaults.link", "defaults.site"):
        return text
    # a long scope (links[name=A-B]) goes on its own line, or it runs off a column-wide figure
    return f"{text}, {scope}" if len(text) + len(scope) <= LABEL_WIDTH else f"{text},\n{scope}"


def _split_unit(key: str) -> tuple[str, str]:
    for suffix, shown in _UNIT_SUFFIXES:
        if key.endswith(suffix):
            return key[: -len(suffix)], shown
    return key, ""


def param_value_label(path: str, value: float) -> str:
    """A legend entry for one value of a swept key path, unit after the value:
    ``("sites[role=repeater].t2_s", 0.1)`` -> ``"t2 = 0.1 s"``."""
    name, unit = _split_unit(path.rpartition(".")[2])
    return f"{name.replace('_', ' ')} = {value:g}" + (f" {unit}" if unit else "")


def header(key: str) -> str:
    """The header (with unit) shown for metric ``key``; the key itself when none is known."""
    return HEADERS.get(key, key)


def poisson_rate_ci95(count: int, time_s: float) -> tuple[float, float]:
    """Exact (Garwood) 95 % interval for a rate from ``count`` events seen in ``time_s`` seconds.

    Lower = chi2.ppf(0.025, 2n) / (2 T), upper = chi2.ppf(0.975, 2n + 2) / (2 T).

    References
    ----------
    F. Garwood, "Fiducial limits for the Poisson distribution", Biometrika 28, 437 (1936).
    """
    from scipy.stats import chi2

    if time_s <= 0 or count < 0:
        return (math.nan, math.nan)
    low = 0.0 if count == 0 else float(chi2.ppf(0.025, 2 * count)) / (2 * time_s)
    return (low, float(chi2.ppf(0.975, 2 * count + 2)) / (2 * time_s))


def binomial_ci95(successes: int, trials: int) -> tuple[float, float]:
    """Exact (Clopper-Pearson) 95 % interval for a success probability from ``successes`` of
    ``trials``: ``beta.ppf(0.025, k, n - k + 1)`` and ``beta.ppf(0.975, k + 1, n - k)``.

    References
    ----------
    C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits illustrated in the
    case of the binomial", Biometrika 26, 404 (1934).
    """
    from scipy.stats import beta

    if trials <= 0 or not 0 <= successes <= trials:
        return (math.nan, math.nan)
    low = 0.0 if successes == 0 else float(beta.ppf(0.025, successes, trials - successes + 1))
    high = 1.0 if successes == trials else float(beta.ppf(0.975, successes + 1, trials - successes))
    return (low, high)


def mean_ci95(values: Sequence[float]) -> tuple[float, float, float]:
    """Mean of ``values`` and the Student-t 95 % interval of that mean: ``(mean, low, high)``.

    With fewer than two finite values the interval is ``(nan, nan)``.
    """
    import numpy as np
    from scipy.stats import t

    data = np.asarray([v for v in values if v is not None and math.isfinite(v)], dtype=float)
    if data.size == 0:
        return (math.nan, math.nan, math.nan)
    mean = float(data.mean())
    if data.size < 2:
        return (mean, math.nan, math.nan)
    half = float(t.ppf(0.975, data.size - 1) * data.std(ddof=1) / math.sqrt(data.size))
    return (mean, mean - half, mean + half)


def combine_ci95(values: Sequence[float], intervals: Sequence[Sequence[float] | None]) -> tuple[float, float, float]:
    """Combine repeated estimates of one quantity, each with its own 95 % interval.

    Each estimate's standard error is its interval's half-width / 1.96 (normal intervals); the
    combined value is the inverse-variance weighted mean, its standard error 1 / sqrt(sum of
    weights), scaled up by the Particle Data Group's factor S = sqrt(chi^2 / (k - 1)) when the
    estimates scatter more than their own errors allow (S > 1; Particle Data Group, Review of
    Particle Physics, "Introduction: averaging procedures"). So two repeats of thousands of
    pairs each give an interval as narrow as their pairs allow, not a t-interval on one degree of
    freedom. Returns ``(value, low, high)``; estimates without a usable interval fall back to
    :func:`mean_ci95` over all values.
    """
    pairs = [(float(v), float(ci[0]), float(ci[1])) for v, ci in zip(values, intervals)
             if v is not None and ci is not None and ci[0] is not None and ci[1] is not None
             and math.isfinite(float(v)) and math.isfinite(float(ci[0])) and math.isfinite(float(ci[1]))
             and float(ci[1]) > float(ci[0])]
    finite = [v for v in values if v is not None and math.isfinite(float(v))]
    if len(pairs) != len(finite) or len(pairs) < 2:
        return mean_ci95(finite)
    z = 1.959963984540054  # two-sided 95 % normal quantile (common practice)
    weights = [(2 * z / (hi - lo)) ** 2 for _, lo, hi in pairs]
    total = math.fsum(weights)
    mean = math.fsum(w * v for w, (v, _, _) in zip(weights, pairs)) / total
    chi2 = math.fsum(w * (v - mean) ** 2 for w, (v, _, _) in zip(weights, pairs))
    scale = max(1.0, math.sqrt(chi2 / (len(pairs) - 1)))
    half = z * scale / math.sqrt(total)
    return (mean, mean - half, mean + half)

