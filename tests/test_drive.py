"""The imposed current ([drive]): Ampere's law for the mean field E0, the charge-starved regime,
the energy theorem, checkpoints, the deck block, the unit conversions, the measured bulk Lorentz
factor; and no [drive] block = the undriven run, bit for bit.

All decks here are invented test plasmas."""
from __future__ import annotations

import math

import h5py
import numpy as np
import pytest
import scipy.constants as sc
import tomli_w

import streamsim
from streamsim import drive, fields, io, kernels, units
from streamsim.cli import main
from streamsim.deck import DeckError, load_deck
from streamsim.engine import Simulation

C_SI = sc.c


def pair_rest(*, current, cells=16, ppc=8, dt=0.02, end=10.0, profile="constant", diag=0.1,
              theta=0.0, extra=None, perturb=False):
    """A cold (or warm) pair plasma at rest, total density 1, with a [drive] block."""
    species = [{"name": n, "charge": q, "mass": 1.0, "density": 0.5, "theta": theta,
                "particles_per_cell": ppc, "loading": "quiet"}
               for n, q in (("electrons", -1.0), ("positrons", 1.0))]
    d = {"title": "driven test plasma", "random_seed": 5, "units": {"density_cm3": 1.0e10},
         "box": {"length": 2 * math.pi, "cells": cells}, "time": {"dt": dt, "end": end},
         "species": species, "output": {"diagnostics_interval": diag, "recorded_modes": 4},
         "drive": {"current": current, "profile": profile, **(extra or {})}}
    if perturb:
        d["perturbation"] = {"modes": [1], "amplitude": 1e-3}
    return d


# ----------------------------------------------------------------------------------------------
# linearised cold response (analytic)
# ----------------------------------------------------------------------------------------------
def test_linear_cold_response_matches_the_analytic_solution():
    """Analytic solution of the linearised cold equations (from memory: cold-fluid motion
    with Ampere's law for the mean field, worked out below).

    Each cold species moves as a whole: du_s/dt = (q_s/m_s) E0 and, for |u| << 1, v_s = u_s.
    Ampere: dE0/dt = J_ext - sum_s q_s n_s v_s. Differentiating once,
        d^2 E0/dt^2 = -sum_s q_s n_s (q_s/m_s) E0 = -w^2 E0,   w^2 = sum_s q_s^2 n_s / m_s,
    with E0(0) = 0 and dE0/dt(0) = J_ext (the plasma starts at rest). Hence
        E0 = (J_ext/w) sin(w t),   <J> = J_ext - dE0/dt = J_ext (1 - cos(w t)).
    Pair plasma of total density 1: w = 1. Check to 1% of J_ext over 10 periods."""
    J = 1.0e-3
    r = streamsim.run(pair_rest(current=J, end=20 * math.pi), write=False, analyze=False)
    s = r.series
    t = s.t
    w = math.sqrt(sum(q * q * 0.5 / 1.0 for q in (-1.0, 1.0)))
    assert w == 1.0
    assert t[-1] == pytest.approx(20 * math.pi, rel=1e-3)
    assert np.max(np.abs(s.drive_e0 - J / w * np.sin(w * t))) < 0.01 * J
    assert np.max(np.abs(s.drive_current - J * (1 - np.cos(w * t)))) < 0.01 * J
    assert np.array_equal(s.drive_current_ext, np.full(t.size, J))
    # energy theorem (Poynting's theorem, 1D electrostatic): W - W0 = L int J_ext E0 dt
    W = s.kinetic.sum(axis=1) + s.field_energy
    gain = np.max(np.abs(W - W[0]))
    assert gain > 0
    assert np.max(np.abs(W - W[0] - s.drive_work)) < 1e-3 * gain


# ----------------------------------------------------------------------------------------------
# charge starvation
# ----------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def starved():
    # limit = sum |q| n c = 1 (special relativity: |v| <= c); J_ext = 2 x the limit
    return streamsim.run(pair_rest(current=2.0, cells=32, ppc=8, end=15.0, diag=0.02),
                         write=False, analyze=True, figures=False)


def test_charge_starved_field_grows_at_j_ext_minus_limit(starved):
    """Once every carrier moves at |v| -> c, <J> -> limit and Ampere gives dE0/dt -> J_ext -
    limit (special relativity bounds |v| by c); measured 6.8e-5 (slope) and 3.2e-5 (current),
    checked to 2e-4 and 1e-4."""
    s = starved.series
    limit = 1.0  # sum_s |q_s| n_s for two unit-charge species of density 0.5
    assert drive.carrying_limit(starved.deck.species) == pytest.approx(limit)
    late = s.t >= 10.0
    slope = np.polyfit(s.t[late], s.drive_e0[late], 1)[0]
    assert abs(slope - (2.0 - limit)) < 2e-4 * (2.0 - limit)
    assert abs(s.drive_current[-1] - limit) < 1e-4 * limit
    d = starved.summary["drive"]
    assert d["charge_starved"] is True and d["ratio"] == pytest.approx(2.0)
    # Ampere's law for the mean field, dE0/dt = J_ext - <J>, integrated here (trapezoidal rule)
    # from the recorded currents, gives the largest |E0| the summary reports
    e0 = np.concatenate([[0.0], np.cumsum(np.diff(s.t) * 0.5 * (
        (s.drive_current_ext - s.drive_current)[1:] + (s.drive_current_ext - s.drive_current)[:-1]))])
    assert d["e0_max"] == pytest.approx(np.max(np.abs(e0)), rel=1e-9)   # measured 5e-11
    for name in ("electrons", "positrons"):
        assert d["gamma_max"][name] > 50 and d["gamma_bulk_final"][name] > 50


def test_charge_starved_momenta_follow_the_uniform_field(starved):
    """In a uniform field each particle obeys du/dt = (q/m) E0 exactly (Newton-Lorentz with
    E = E0), so u(t) = u0 + (q/m) int_0^t E0 dt; the integral is taken here by the trapezoidal
    rule over the recorded E0 (every step), to the final half step t_N - dt/2."""
    s, dt = starved.series, starved.deck.time.dt
    t, e0 = s.t, s.drive_e0
    integral = np.trapezoid(e0, t) - 0.5 * dt * 0.5 * (e0[-1] + e0[-2])
    for name, q in (("electrons", -1.0), ("positrons", 1.0)):
        u = starved.u[name]
        expected = q * integral          # u0 = 0, m = 1
        assert abs(expected) > 50
        assert np.max(np.abs(u - expected)) < 2.5e-6 * abs(expected)     # measured 8.0e-7


def test_charge_starved_energy_theorem(starved):
    """W_kin + W_field - W0 = L int J_ext E0 dt to 2e-6 of the energy gained (Poynting's
    theorem for the 1D electrostatic system); measured 6.2e-7."""
    err = starved.summary["drive"]["energy_balance_error"]
    assert err is not None and err < 2e-6
    s = starved.series
    W = s.kinetic.sum(axis=1) + s.field_energy
    L = starved.deck.box.length
    work = L * np.concatenate([[0.0], np.cumsum(np.diff(s.t) * 0.5 * (
        (s.drive_current_ext * s.drive_e0)[1:] + (s.drive_current_ext * s.drive_e0)[:-1]))])
    assert np.max(np.abs(W - W[0] - work)) < 2e-6 * np.max(np.abs(W - W[0]))


@pytest.mark.parametrize("profile,extra", [("ramp", {"ramp_time": 5.0}),
                                           ("sine", {"angular_frequency": 0.5, "phase": 0.3})])
def test_energy_theorem_for_warm_driven_plasmas(profile, extra):
    """Poynting's theorem in 1D ES, d(W_kin + W_field)/dt = L E0 J_ext, holds with k != 0
    fields too (warm, perturbed plasma); measured 1.6e-5 (ramp) and 1.1e-4 (sine) of the energy
    gained, checked to 3.5e-4."""
    raw = pair_rest(current=0.8, cells=32, ppc=16, end=20.0, profile=profile, extra=extra,
                    theta=1e-2, perturb=True)
    r = streamsim.run(raw, write=False, analyze=False)
    s = r.series
    W = s.kinetic.sum(axis=1) + s.field_energy
    gain = np.max(np.abs(W - W[0]))
    assert gain > 1e-2
    assert np.max(np.abs(W - W[0] - s.drive_work)) < 3.5e-4 * gain
    # the profiles written out here: 0.8 min(t/5, 1) and 0.8 sin(0.5 t + 0.3)
    jx = 0.8 * (np.minimum(s.t / 5.0, 1.0) if profile == "ramp" else np.sin(0.5 * s.t + 0.3))
    assert np.allclose(s.drive_current_ext, jx, rtol=1e-12, atol=1e-14)


# ----------------------------------------------------------------------------------------------
# no drive: bit-identical to the undriven run
# ----------------------------------------------------------------------------------------------
def test_no_drive_block_is_the_undriven_run_bit_for_bit(tmp_path):
    """Without [drive] the engine is the plain leapfrog: the same kernels called here by hand
    (push_deposit, the Poisson solve) give every bit of the run; no drive dataset, summary key
    or checkpoint entry appears."""
    from conftest import pair_deck
    raw = pair_deck(cells=32, ppc=8, end=4.0, nwaves=2)
    r = streamsim.run(raw, out=tmp_path / "run", analyze=True, figures=False)
    sim = Simulation(load_deck(raw))          # the initial state, u^{-1/2}
    b = sim.deck.box
    x = [a.copy() for a in sim.x]
    u = [a.copy() for a in sim.u]
    efield = sim.efield.copy()
    partial = np.zeros_like(sim.partial)
    sums = np.zeros_like(sim.sums[0])
    for _ in range(sim.steps):
        dens = np.zeros((len(x), b.cells))
        for s in range(len(x)):
            kernels.push_deposit(x[s], u[s], efield, sim.qm[s] * sim.dt, sim.dt, b.length,
                                 sim.shape, sim.nchunks, partial, sums)
            dens[s] = partial.sum(axis=0) * (sim.weights[s] / b.dx)
        efield = fields.solve(sim.charges @ dens, sim.green)
    for s, name in enumerate(sim.names):
        assert np.array_equal(r.x[name], x[s])
        assert np.array_equal(r.u[name], u[s])
    with h5py.File(tmp_path / "run" / io.FILES["series"], "r") as f:
        assert not [k for k in f if k.startswith("drive")]
    assert "drive" not in r.summary and "drive" not in r.analysis.get("drive").summary
    assert "measure" not in r.summary["energy"]
    with h5py.File(tmp_path / "run" / io.FILES["checkpoint"], "r") as f:
        assert "drive" not in f["handlers"]
        assert '"drive"' not in f.attrs["meta"]
    assert "[drive]" not in (tmp_path / "run" / io.FILES["deck"]).read_text()


# ----------------------------------------------------------------------------------------------
# checkpoints carry E0
# ----------------------------------------------------------------------------------------------
def test_driven_resume_is_bit_identical(tmp_path):
    raw = pair_rest(current=1.5, cells=32, ppc=8, end=6.0, perturb=True)
    raw["output"]["checkpoint_interval"] = 1.0
    straight = streamsim.run(raw, out=tmp_path / "a", analyze=False)
    with pytest.raises(streamsim.pipeline.Interrupted):
        streamsim.run(raw, out=tmp_path / "b", analyze=False, stop_after_steps=123)
    resumed = streamsim.run(raw, out=tmp_path / "b", analyze=False, resume=True)
    for name in straight.x:
        assert np.array_equal(straight.x[name], resumed.x[name])
        assert np.array_equal(straight.u[name], resumed.u[name])
    for k in ("t", "drive_e0", "drive_current", "drive_current_ext", "drive_work",
              "drive_gamma_max", "drive_gamma_hist", "field_energy"):
        assert np.array_equal(straight.series.arrays[k], resumed.series.arrays[k]), k
    with h5py.File(tmp_path / "b" / io.FILES["series"], "r") as f:
        assert f["drive_e0"].shape == f["t"].shape == f["drive_current_ext"].shape


# ----------------------------------------------------------------------------------------------
# the deck block
# ----------------------------------------------------------------------------------------------
@pytest.mark.parametrize("block,key,reason", [
    ({}, "drive.current", "is required"),
    ({"current": 1.0, "current_A_m2": 5.0}, "drive.current_A_m2", "not several"),
    ({"current": "2"}, "drive.current", "must be a number"),
    ({"current": 1.0, "profile": "ramps"}, "drive.profile", "did you mean 'ramp'"),
    ({"current": 1.0, "profile": "ramp"}, "drive.ramp_time", "is required"),
    ({"current": 1.0, "profile": "ramp", "ramp_time": -1.0}, "drive.ramp_time", "> 0"),
    ({"current": 1.0, "profile": "sine"}, "drive.angular_frequency", "is required"),
    ({"current": 1.0, "angular_frequency": 0.1}, "drive.angular_frequency", "applies only"),
    ({"current": 1.0, "phase": 0.1}, "drive.phase", "applies only"),
    ({"current": 1.0, "theory_time": 1e6}, "drive.theory_time", "time.end"),
    ({"curent": 1.0}, "drive.curent", "did you mean 'current'"),
])
def test_bad_drive_blocks_exit_2_with_one_line(block, key, reason, tmp_path, capsys):
    raw = pair_rest(current=1.0)
    raw["drive"] = block
    path = tmp_path / "deck.toml"
    path.write_text(tomli_w.dumps(raw))
    rc = main(["run", str(path), "--quiet", "--out", str(tmp_path / "out")])
    lines = capsys.readouterr().err.strip().splitlines()
    assert rc == 2 and len(lines) == 1
    assert lines[0].startswith(f"deck error: {key}") and reason in lines[0], lines[0]


def test_physical_current_forms_and_overrides():
    n = 1.0e10
    raw = pair_rest(current=1.0)
    raw["drive"] = {"current_statA_cm2": 2.88e11}
    d = load_deck(raw).drive
    # e n c at 1e10 cm^-3: 4.803e-10 statC x 1e10 x 2.998e10 cm/s = 1.440e11 statA/cm^2
    # (NRL Plasma Formulary constants, from memory)
    assert d.current == pytest.approx(2.0, rel=1e-3)
    raw["drive"] = {"current_A_m2": 4.8032e5}
    assert load_deck(raw).drive.current == pytest.approx(1.0, rel=1e-3)
    over = load_deck(pair_rest(current=1.0), ["drive.current_A_m2=9.6e5"]).drive
    assert over.current == pytest.approx(2.0, rel=1e-3) and over.current_A_m2 == 9.6e5
    back = load_deck(load_deck(raw).to_dict())
    assert back == load_deck(raw) and back.drive.current == load_deck(raw).drive.current
    with pytest.raises(DeckError, match="drive.current"):
        load_deck(pair_rest(current=1.0), ["drive.current=true"])
    assert units.current_statA_cm2(1.0, n) == pytest.approx(1.440e11, rel=1e-3)


def test_unit_conversions_against_the_handbook():
    """NRL Plasma Formulary conversion table: 1 A = 3e9 statA (precisely 10 c[SI]), so
    1 statA/cm^2 = 1e4 / 2.998e9 A/m^2; 1 statV/cm = 3e4 V/m (precisely c[SI] 1e-4)."""
    n = 3.0e12
    ratio = units.current_A_m2(1.0, n) / units.current_statA_cm2(1.0, n)
    assert ratio == pytest.approx(1.0e4 / (10.0 * C_SI), rel=1e-12)
    assert units.current_from_A_m2(units.current_A_m2(0.7, n), n) == pytest.approx(0.7)
    # E unit m_e c omega_p / e computed in SI (omega_p^2 = n e^2 / (eps0 m_e)), then in statV/cm
    wp = math.sqrt(n * 1e6 * sc.e ** 2 / (sc.epsilon_0 * sc.m_e))
    e_si = sc.m_e * C_SI * wp / sc.e                   # V/m
    assert units.efield_statv_cm(1.0, n) == pytest.approx(e_si / (C_SI * 1e-4), rel=1e-9)


def test_profiles_and_the_carrying_limit():
    d = load_deck(pair_rest(current=-3.0, profile="sine", extra={"angular_frequency": 0.5,
                                                                  "phase": 0.2})).drive
    assert drive.external_current(d, 1.0) == pytest.approx(-3.0 * math.sin(0.7))
    assert drive.max_abs_current(d, 1.0) == pytest.approx(3.0 * math.sin(0.7))
    assert drive.max_abs_current(d, 4.0) == pytest.approx(3.0)
    ramp = load_deck(pair_rest(current=2.0, profile="ramp", extra={"ramp_time": 4.0})).drive
    assert drive.external_current(ramp, 1.0) == pytest.approx(0.5)
    assert drive.external_current(ramp, 9.0) == pytest.approx(2.0)
    assert drive.max_abs_current(ramp, 2.0) == pytest.approx(1.0)
    # electrons (density 1), positrons (0.5) and an ion species of charge 2 (0.25): sum |q| n c
    raw = pair_rest(current=1.0)
    raw["species"].append({"name": "ions", "charge": 2.0, "mass": 1836.0, "density": 0.25,
                           "particles_per_cell": 8, "loading": "quiet"})
    raw["species"][0]["density"] = 1.0              # neutral: 2 x 0.25 + 0.5 = 1.0
    sp = load_deck(raw).species
    assert drive.carrying_limit(sp) == pytest.approx(1.0 + 0.5 + 0.5)


def test_bulk_lorentz_factor_of_simple_flows():
    """A cold beam of u0 has Gamma = sqrt(1 + u0^2) (special relativity); two equal cold beams
    of +-u0 (no net flow) have Gamma = 1."""
    u0 = 3.0
    g0 = math.sqrt(1 + u0 * u0)
    assert drive.bulk_lorentz_factor(g0, u0) == pytest.approx(g0, rel=1e-12)
    assert drive.bulk_lorentz_factor(g0, 0.0) == pytest.approx(1.0)


# ----------------------------------------------------------------------------------------------
# analysis.bulk_gamma = "measured"
# ----------------------------------------------------------------------------------------------
def test_measured_bulk_gamma_in_the_coherence_block():
    """Cold beams at drift_beta = 0.6: the measured bulk Lorentz factor at t = 0 is
    1/sqrt(1 - 0.36) = 1.25 (special relativity), and nu_c scales with it exactly as with the
    number given."""
    from conftest import pair_deck
    from streamsim import analysis
    raw = pair_deck(beta=0.6, cells=32, ppc=8, end=2.0, nwaves=2)
    r = streamsim.run(raw, write=False, analyze=False)
    meas = analysis.options_for(r.deck, bulk_gamma="measured")
    assert meas.bulk_gamma == "measured"
    res = analysis.compute(r.data, meas)["coherence"].summary["coherence"]
    t = res["t"]
    if t == 0.0:
        assert res["bulk_gamma_measured"]["electrons"] == pytest.approx(1.25, rel=1e-6)
    assert "measured" in res["bulk_gamma_source"]
    G = res["bulk_gamma"]
    assert G == pytest.approx(1.25, rel=2e-2)
    fixed = analysis.compute(r.data, analysis.options_for(r.deck, bulk_gamma=G))
    fx = fixed["coherence"].summary["coherence"]
    if fx["frequency_cutoff_hz"] is not None:
        assert res["frequency_cutoff_hz"] == pytest.approx(fx["frequency_cutoff_hz"], rel=1e-12)


def test_demo_decks_load():
    below = load_deck("runs/drive-below-limit.toml")
    starved = load_deck("runs/drive-charge-starved.toml")
    lim_b = drive.carrying_limit(below.species)
    lim_s = drive.carrying_limit(starved.species)
    assert drive.max_abs_current(below.drive, below.time.end) < 0.5 * lim_b
    assert drive.max_abs_current(starved.drive, starved.time.end) == pytest.approx(2 * lim_s)
