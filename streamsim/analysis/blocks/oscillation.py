"""Oscillation block: seeded box modes that the linear theory does not make grow ring; their
frequency and damping are fitted beside the nearest root of the dielectric function.

Summary key: ``oscillation`` (a list, one entry per seeded stable mode). Table: ``oscillation``.
"""
from __future__ import annotations

import math

import numpy as np

from .. import oscillation as _os
from ...numbers import finite_or_none
from ..base import BlockResult, Context, Table, fmt, rate_ns

NAME = "oscillation"
SCAN_COLUMNS: list = []


def compute(ctx: Context) -> BlockResult:
    rows = _os.oscillation_block(ctx.data)
    cols = ("mode", "k", "omega_r", "omega_r_err", "rate", "rate_err", "theory_omega_r",
            "theory_rate")
    tables = {}
    if rows:
        tables["oscillation"] = Table("oscillation", {
            c: np.array([np.nan if r.get(c) is None else r[c] for r in rows], float)
            for c in cols}, units={c: "omega_p" for c in cols if c not in ("mode", "k")})
    n_cm3 = ctx.density_cm3
    return BlockResult(NAME, {"oscillation": rows}, tables, [],
                       [_line(o, n_cm3) for o in rows])


def _ghz(omega, n_cm3: float) -> str:
    """A frequency omega (omega_p) as omega/2 pi in GHz."""
    from ... import units
    v = finite_or_none(omega)
    return "n/a" if v is None else f"{v * units.omega_p_rad_s(n_cm3) / (2e9 * math.pi):.4g} GHz"


def _line(o: dict, n_cm3: float) -> str:
    if o.get("omega_r") is None:
        return f"seeded mode {o['mode']}: {o.get('note', 'no oscillation to fit')}"
    th = ""
    if o.get("theory_omega_r") is not None:
        sign = "+" if o["theory_rate"] >= 0 else "-"
        sig = o.get("agree_sigma")
        th = (f" vs {o['theory_model']} root {fmt(o['theory_omega_r'], '.4f')} "
              f"{sign} {fmt(abs(o['theory_rate']), '.4f')}i of {o.get('theory_state')}"
              + (f" ({sig:.2g} sigma apart)" if sig is not None else ""))
    elif o.get("theory_note"):
        th = f"; {o['theory_note']}"
    rate = finite_or_none(o.get("rate"))
    tau = (f", damping time {rate_ns(-rate, n_cm3)}" if rate is not None and rate < 0 else
           f", e-folding time {rate_ns(rate, n_cm3)}" if rate else "")
    return (f"seeded mode {o['mode']} (k = {fmt(o['k'])} w_p/c) rings at "
            f"{fmt(o['omega_r'], '.4f')} +- {fmt(o.get('omega_r_err'), '.1g')} w_p "
            f"({_ghz(o['omega_r'], n_cm3)}), rate {fmt(o['rate'], '.4f')} +- "
            f"{fmt(o.get('rate_err'), '.1g')} w_p{tau}{th}")
