"""Shared helpers for the tests: small decks as dicts, a temporary run folder."""
from __future__ import annotations

import copy
import tomllib

import pytest

from streamsim.deck import DEFAULT_DECK


@pytest.fixture
def default_raw() -> dict:
    """The built-in default deck as raw TOML data (a fresh copy per test)."""
    return copy.deepcopy(tomllib.loads(DEFAULT_DECK))


def plasma_deck(*, cells=64, length=6.283185307179586, ppc=64, theta=0.0, dt=0.05, end=20.0,
                modes=(1,), amplitude=0.01, loading="quiet", shape="cic", solver="spectral",
                seed=3, diag=None, extra_output=None) -> dict:
    """One electron species on a neutralising background (invented test plasma)."""
    out = {"diagnostics_interval": diag or dt, "recorded_modes": min(8, cells // 2)}
    out.update(extra_output or {})
    return {
        "title": "test plasma", "random_seed": seed,
        "units": {"density_cm3": 1.0e9},
        "box": {"length": length, "cells": cells, "shape": shape, "solver": solver},
        "time": {"dt": dt, "end": end},
        "species": [{"name": "electrons", "charge": -1.0, "mass": 1.0, "density": 1.0,
                     "theta": theta, "particles_per_cell": ppc, "loading": loading}],
        "perturbation": {"modes": list(modes), "amplitude": amplitude},
        "output": out,
    }


def pair_deck(*, beta=0.1, cells=128, ppc=64, nwaves=8, dt=0.05, end=40.0, theta=0.0,
              amplitude=1e-4, shape="cic", loading="quiet", seed=1) -> dict:
    """Symmetric cold (or warm) e-/e+ beams, box = nwaves wavelengths of the analytic fastest
    cold mode k v0 = (sqrt(3)/2) omega_b (cold two-stream relation, Birdsall & Langdon 1991;
    from memory)."""
    import math
    g0 = 1.0 / math.sqrt(1 - beta * beta)
    wb = math.sqrt(0.5 / g0**3)
    kfast = math.sqrt(3) / 2 * wb / beta
    species = []
    for name, q, b in (("electrons", -1.0, beta), ("positrons", 1.0, -beta)):
        species.append({"name": name, "charge": q, "mass": 1.0, "density": 0.5, "drift_beta": b,
                        "theta": theta, "particles_per_cell": ppc, "loading": loading})
    return {
        "title": "test pair beams", "random_seed": seed, "units": {"density_cm3": 1.0e10},
        "box": {"length": nwaves * 2 * math.pi / kfast, "cells": cells, "shape": shape},
        "time": {"dt": dt, "end": end}, "species": species,
        "perturbation": {"modes": [nwaves], "amplitude": amplitude},
        "output": {"diagnostics_interval": dt, "recorded_modes": min(16, cells // 2)},
    }
