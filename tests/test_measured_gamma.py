"""``analysis.bulk_gamma = "measured"``: every frequency of the coherence block scales with the
measured bulk Lorentz factor.

nu_c = Gamma c k_c / 2 pi: a cutoff wavenumber k_c of the bunched flow, seen from a frame towards
which the flow moves with bulk Lorentz factor Gamma, is emitted at a frequency raised by the
Lorentz factor of the boost (Rybicki & Lightman 1979, Radiative Processes in Astrophysics, ch. 4,
the Doppler factor of a moving source). The relation is linear in Gamma, so every frequency the
block reports — value, error, lower bound, GHz form, per species, at the peak and at the end —
is Gamma x the frequency the block reports with Gamma = 1. Gamma is read here from the drive
block's own series (the per-particle moments <gamma>, <u> the drive recorder keeps), an
independent record from the energy and momentum sums the coherence block's Gamma comes from.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import streamsim
from streamsim import analysis

DECK = Path(__file__).resolve().parent.parent / "runs" / "drive-below-limit.toml"
#: a warm variant whose cutoff is not grid-limited: a current of 0.8 e n_ref c (below the
#: carrying limit 1) sets the pair streaming at Gamma ~ 1.7-2.6 (invented parameters)
WARM = ["drive.current=0.8", *(f"species.{s}.{k}" for s in ("electrons", "positrons")
                               for k in ("theta=0.02", 'distribution="juttner"'))]
FREQS = ("frequency_cutoff_hz", "frequency_cutoff_err_hz", "frequency_cutoff_lower_bound_hz")


def _both(overrides):
    """The single instants (peak_snapshot, end) of the coherence block with the measured Gamma
    and with Gamma = 1, the drive's Gamma(t), and the window headlines with the window's
    record times."""
    r = streamsim.run(DECK, write=False, analyze=False, threads=1, overrides=overrides)
    meas = analysis.compute(r.data, analysis.options_for(r.deck, bulk_gamma="measured"))
    one = analysis.compute(r.data, analysis.options_for(r.deck, bulk_gamma=1.0))
    tab = meas["drive"].tables["drive_series"]

    def gamma(t, name):
        return float(np.interp(t, tab.col("t"), tab.col(f"gamma_bulk_{name}")))
    cm, c1 = meas["coherence"].summary["coherence"], one["coherence"].summary["coherence"]
    ser = meas["emission"].tables["emission_series"]
    t_win = ser.col("t")[ser.col("in_window").astype(bool)]
    _window.update(cm=cm, c1=c1, t=t_win)
    return ({**cm["peak_snapshot"], "end": cm["end"]}, {**c1["peak_snapshot"], "end": c1["end"]},
            gamma)


_window: dict = {}


def _check_window(gamma, head_keys):
    """Over the saturated window each species' Gamma is its mean over the window's records, and
    every window frequency is that Gamma x the Gamma = 1 frequency."""
    cm, c1, t = _window["cm"], _window["c1"], _window["t"]
    assert t.size >= 2
    for name, r in cm["by_species"].items():
        Gs = float(np.mean([gamma(x, name) for x in t]))
        assert r["bulk_gamma"] == pytest.approx(Gs, rel=1e-4), name
        if r.get("frequency_cutoff_hz") is not None:
            assert r["frequency_cutoff_hz"] == pytest.approx(
                Gs * c1["by_species"][name]["frequency_cutoff_hz"], rel=1e-9)
    if cm.get("species") is not None:
        G = cm["by_species"][cm["species"]]["bulk_gamma"]
        assert cm["bulk_gamma"] == pytest.approx(G, rel=1e-12)
        for key in head_keys:
            assert cm[key] == pytest.approx(G * c1[key], rel=1e-9), key


def _check(cm, c1, gamma, head_keys, species_keys, end_keys):
    G = gamma(cm["t"], cm["species"])
    assert G > 1.0 + 1e-3          # the drive did set the plasma moving
    assert cm["bulk_gamma"] == pytest.approx(G, rel=1e-6)
    for key in FREQS:              # these must be numbers, the others None, in both
        assert (cm.get(key) is not None, c1.get(key) is not None) == ((key in head_keys,) * 2), key
        if key in head_keys:
            assert cm[key] == pytest.approx(G * c1[key], rel=1e-9), key
    for name, r in cm["by_species"].items():
        Gs = gamma(cm["t"], name)
        for key in species_keys:
            assert r[key] is not None and c1["by_species"][name][key] is not None, (name, key)
            assert r[key] == pytest.approx(Gs * c1["by_species"][name][key], rel=1e-6), (name, key)
    end_m, end_1 = cm["end"], c1["end"]
    Ge = gamma(end_m["t"], end_m["species"]) if end_m["species"] else None
    for key in end_keys:
        assert end_m[key] is not None and end_1[key] is not None, key
        assert end_m[key] == pytest.approx(Ge * end_1[key], rel=1e-6), key


def test_every_frequency_scales_with_the_measured_gamma_warm_not_grid_limited():
    cm, c1, gamma = _both(WARM)
    assert cm["grid_limited"] is False and c1["grid_limited"] is False
    _check(cm, c1, gamma, head_keys=("frequency_cutoff_hz", "frequency_cutoff_err_hz"),
           species_keys=("frequency_cutoff_hz", "frequency_cutoff_err_hz"),
           end_keys=("frequency_cutoff_hz",))
    # the end snapshot has its own Gamma (the flow keeps accelerating), not the peak's
    assert cm["end"]["bulk_gamma"] > cm["bulk_gamma"] * 1.1
    _check_window(gamma, ("frequency_cutoff_hz", "frequency_cutoff_err_hz"))


def test_every_frequency_scales_with_the_measured_gamma_grid_limited():
    cm, c1, gamma = _both([])
    assert cm["grid_limited"] is True and c1["grid_limited"] is True
    _check(cm, c1, gamma, head_keys=("frequency_cutoff_err_hz", "frequency_cutoff_lower_bound_hz"),
           species_keys=("frequency_cutoff_hz", "frequency_cutoff_err_hz"), end_keys=())
