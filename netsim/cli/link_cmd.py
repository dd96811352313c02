"""``netsim link``: what one fibre span allows, for one or more lengths.

For each length the command prints the loss in dB, the transmissivity eta, the repeaterless
bound -log2(1 - eta) (Pirandola et al. 2017), the Holevo information of the chosen encoding
ensemble through the span's qubit channel, that channel's Holevo capacity, and the coherent
information of a Bell pair whose second qubit crosses the span (hashing bound, ebits per pair).
The repeaterless bound limits entanglement and secret-key rates, not classical information: at
high loss the classical Holevo figures of a qubit may exceed it.

The span's qubit channel is :func:`netsim.hardware.fibre.qubit_channel`: depolarizing with
parameter p at the sender (rho -> (1 - p) rho + p I/2), then the loss of the fibre with
eta = 10^(-(alpha L + extra)/10), modelled either as an erasure with eps = 1 - eta (``--loss-model erasure``, the default and
the model budgets and the engine use: a polarisation or time-bin qubit whose loss is noticed)
or as amplitude damping with gamma = 1 - eta (``--loss-model damping``: a single-rail qubit,
|1> one photon, |0> vacuum, so a lost photon looks like |0>).
"""

from __future__ import annotations

import argparse
import math
from collections.abc import Mapping
from typing import Any

import numpy as np

__all__ = ["ENCODINGS", "LOSS_MODELS", "link_rows", "link_table", "register", "run"]

#: Encoding ensembles (equal priors): two orthogonal states, or the four BB84 states.
ENCODINGS = ("binary", "bb84")
LOSS_MODELS = ("damping", "erasure")
_FORMATS = ("table", "csv", "md", "tex", "json")

_DESCRIPTION = """\
Single-span calculator. For each fibre length: loss (dB), transmissivity eta, the repeaterless
bound -log2(1 - eta) in bits per channel use, the Holevo information of the encoding through
the span's qubit channel (bits per sent qubit), the Holevo capacity of that channel (bits per
use, optimised over input ensembles) and the coherent information of a Bell pair sent through
it (ebits per pair, clipped at 0). Channel model: depolarizing p at the sender
(rho -> (1 - p) rho + p I/2), then fibre loss with eta = 10^(-(alpha L + extra)/10) as
an erasure eps = 1 - eta (polarisation or time-bin qubit; default, as in budgets) or as
amplitude damping gamma = 1 - eta (single-rail qubit).
Units: km, dB, dB/km, bits."""


def register(subparsers: Any) -> None:
    """Add the ``link`` subcommand."""
    parser = subparsers.add_parser("link", help="bounds and Holevo information of one fibre span",
                                   description=_DESCRIPTION)
    parser.add_argument("--length-km", type=float, nargs="+", required=True, metavar="KM",
                        help="one or more fibre lengths in km (>= 0)")
    parser.add_argument("--attenuation-db-per-km", type=float, default=0.2, metavar="DB_PER_KM",
                        help="fibre attenuation in dB/km (>= 0; default 0.2, deployed fibre at 1550 nm)")
    parser.add_argument("--extra-loss-db", type=float, default=0.0, metavar="DB",
                        help="lumped extra loss in dB: connectors, splices, switches (>= 0; default 0)")
    parser.add_argument("--depolarizing", type=float, default=0.0, metavar="P",
                        help="depolarizing parameter p in [0, 1] at the sender (default 0)")
    parser.add_argument("--encoding", default="binary",
                        help="encoding ensemble: binary ({|0>, |1>}) or bb84 ({|0>, |1>, |+>, |->}); "
                             "equal priors (default binary)")
    parser.add_argument("--loss-model", default="erasure",
                        help="what loss does to the qubit: damping (gamma = 1 - eta) or erasure "
                             "(eps = 1 - eta) (default erasure)")
    parser.add_argument("--format", default="table", help="output: " + ", ".join(_FORMATS) + " (default table)")
    parser.set_defaults(func=run)



def _check(args: argparse.Namespace) -> None:
    from netsim.errors import ParameterError, nonnegative, probability

    for length in args.length_km:
        nonnegative("--length-km", length)
    nonnegative("--attenuation-db-per-km", args.attenuation_db_per_km)
    nonnegative("--extra-loss-db", args.extra_loss_db)
    probability("--depolarizing", args.depolarizing)
    for flag, value, allowed in (("--encoding", args.encoding, ENCODINGS),
                                 ("--loss-model", args.loss_model, LOSS_MODELS),
                                 ("--format", args.format, _FORMATS)):
        if value not in allowed:
            raise ParameterError(flag, value, "one of " + ", ".join(allowed))


def encoding_states(name: str) -> tuple[np.ndarray, np.ndarray]:
    """(probabilities, states) of an encoding ensemble, equal priors."""
    ket0, ket1 = np.array([1, 0], dtype=complex), np.array([0, 1], dtype=complex)
    kets = [ket0, ket1]
    if name == "bb84":
        kets += [(ket0 + ket1) / math.sqrt(2), (ket0 - ket1) / math.sqrt(2)]
    states = np.stack([np.outer(k, k.conj()) for k in kets])
    return np.full(len(kets), 1.0 / len(kets)), states


def link_rows(lengths_km: list[float], attenuation_db_per_km: float, extra_loss_db: float = 0.0,
              depolarizing: float = 0.0, encoding: str = "binary", loss_model: str = "erasure") -> list[dict[str, Any]]:
    """One row per length with the figures of the ``link`` table (see the module docstring)."""
    from netsim import qinfo
    from netsim.hardware import fibre

    probs, states = encoding_states(encoding)
    bell = qinfo.bell_state("phi+")
    rows = []
    for length in lengths_km:
        loss = fibre.loss_db(length, attenuation_db_per_km, extra_loss_db)
        eta = fibre.db_to_transmissivity(loss)
        channel = fibre.qubit_channel(eta, depolarizing, loss_model)
        pair = channel.apply(bell, qubit=1)
        rows.append({
            "length_km": float(length), "loss_db": loss, "transmissivity": eta,
            "plob_bits_per_use": float(qinfo.plob_bound(eta)),
            "holevo_bits": float(qinfo.holevo_information(probs, channel.apply(states))),
            "capacity_bits": qinfo.holevo_capacity(channel)[0],
            "coherent_info_ebits": float(qinfo.coherent_information(pair, dims=(2, channel.d_out))),
        })
    return rows


def link_table(args: argparse.Namespace) -> Any:
    """The :class:`netsim.report.table.Table` for parsed ``link`` arguments."""
    from netsim.report.table import Column, Table

    rows: list[Mapping[str, Any]] = [*link_rows(args.length_km, args.attenuation_db_per_km, args.extra_loss_db,
                     args.depolarizing, args.encoding, args.loss_model)]
    columns = [Column("length_km", "length (km)"), Column("loss_db", "loss (dB)"),
               Column("transmissivity", "eta"), Column("plob_bits_per_use", "repeaterless bound (ebit/use)"),
               Column("holevo_bits", "Holevo information (bit/qubit)"),
               Column("capacity_bits", "Holevo capacity (bit/use)"),
               Column("coherent_info_ebits", "coherent info (ebit/pair)")]
    loss = "amplitude damping gamma = 1 - eta" if args.loss_model == "damping" else "erasure eps = 1 - eta"
    notes = [(f"attenuation {args.attenuation_db_per_km:g} dB/km, extra loss {args.extra_loss_db:g} dB; "
              f"channel: depolarizing p = {args.depolarizing:g} at the sender, then {loss}."),
             (f"Holevo information of the {args.encoding} encoding. Repeaterless bound (PLOB): "
              "-log2(1 - eta) (Pirandola et al., Nat. Commun. 8, 15043, 2017), the limit for "
              "entanglement and secret key without repeaters; it does not bound classical capacity."),
             ("Coherent info: of a Bell pair with one qubit sent through the span, the larger of "
              "S(B) - S(AB) and S(A) - S(AB) (one-way hashing from either end; Devetak & Winter, "
              "Proc. R. Soc. A 461, 207, 2005).")]
    return Table("Single fibre span", columns, rows, notes)


def run(args: argparse.Namespace) -> int:
    """Print the table in the chosen format; bad flags raise ParameterError (exit 2)."""
    from netsim.report.table import render

    _check(args)
    print(render(link_table(args), args.format), end="")
    return 0
