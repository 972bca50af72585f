"""`streamsim run` as a user runs it: exit codes, files, summary.json contract, openPMD."""
from __future__ import annotations

import json
import subprocess
import sys

import h5py
import numpy as np
import pytest

import streamsim
from streamsim import io

SMALL = ["--set", "box.cells=64", "--set", "time.end=20.0", "--set", "box.length=8.2",
         "--set", "species.electrons.particles_per_cell=16",
         "--set", "species.positrons.particles_per_cell=16"]


def cli(*args, cwd=None, timeout=300):
    return subprocess.run([sys.executable, "-m", "streamsim.cli", *args], capture_output=True,
                          text=True, cwd=cwd, timeout=timeout)


@pytest.fixture(scope="module")
def small_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("run") / "demo"
    proc = cli("run", "--quiet", "--out", str(out), *SMALL)
    assert proc.returncode == 0, proc.stderr
    return out


def test_run_writes_every_file(small_run):
    for name in io.FILES.values():
        assert (small_run / name).is_file(), name


def test_summary_contract_keys(small_run):
    s = json.loads((small_run / "summary.json").read_text())
    for key in ("streamsim_version", "deck_title", "normalization", "steps", "particles",
                "wall_s", "particle_steps_per_s", "energy", "momentum"):
        assert key in s
    for key in ("density_cm3", "omega_p_rad_s", "skin_depth_cm", "plasma_period_ns"):
        assert key in s["normalization"]
    assert "relative_error_max" in s["energy"] and "error_max" in s["momentum"]
    assert s["steps"] == 400 and s["particles"] == 2 * 64 * 16
    # handbook value for the deck's density (NRL: 5.64e4 n^1/2 rad/s)
    assert s["normalization"]["omega_p_rad_s"] == pytest.approx(5.64e4 * 1e5, rel=1e-3)


def test_openpmd_validator_zero_errors_zero_warnings(small_run, capsys):
    check_h5 = pytest.importorskip("openpmd_validator.check_h5")
    errors, warnings = check_h5.check_file(str(small_run / io.FILES["fields"]))
    assert (errors, warnings) == (0, 0)


def test_openpmd_fields_are_in_si_via_unitSI(small_run):
    """rho * unitSI integrates to zero net charge (neutral pair plasma); E unitSI = m_e c omega_p/e."""
    import scipy.constants as sc
    with h5py.File(small_run / io.FILES["fields"], "r") as f:
        it = sorted(f["data"], key=int)[0]
        e = f[f"data/{it}/meshes/E"]
        wp = 5.64e4 * 1e5  # NRL, rad/s
        assert e["x"].attrs["unitSI"] == pytest.approx(sc.m_e * sc.c * wp / sc.e, rel=1e-3)
        dens = f[f"data/{it}/meshes/density_electrons"][()]
        assert dens.mean() == pytest.approx(0.5, rel=1e-12)
        meshes = [f[f"data/{i}/meshes"] for i in sorted(f["data"], key=int)]
        meshes = [m for m in meshes if "rho" in m]             # the field-cadence iterations
        assert len(meshes) > 5
        for m in meshes:
            rho = m["rho"]
            # rho in units of e n_ref: e = 1.602176634e-19 C (SI 2019 exact), n_ref = 1e10 cm^-3
            assert rho.attrs["unitSI"] == pytest.approx(1.602176634e-19 * 1e10 * 1e6, rel=1e-9)
            r = rho[()] * rho.attrs["unitSI"]                 # C/m^3
            # charge density is sum_s q_s n_s (Gauss) and integrates to zero: a neutral pair plasma
            np.testing.assert_allclose(rho[()], m["density_positrons"][()] - m["density_electrons"][()],
                                       rtol=0, atol=1e-12)
            scale = 0.5 * rho.attrs["unitSI"] * r.size          # one species' charge, C/m^3 x cells
            assert abs(r.sum()) < 1e-12 * scale


def test_resolved_deck_reloads_to_the_same_deck(small_run):
    deck = streamsim.load_deck(small_run / "deck.toml")
    again = streamsim.load_deck(deck.to_dict())
    assert deck == again


def test_bad_deck_one_line_exit_2_no_folder(tmp_path):
    out = tmp_path / "never"
    proc = cli("run", "--out", str(out), "--set", "species.positrons.drift_beta=1.2")
    assert proc.returncode == 2
    assert proc.stderr.strip().splitlines() == [
        "deck error: species.positrons.drift_beta = 1.2: |drift_beta| must be < 1"]
    assert not out.exists()


def test_python_api_result_fields():
    res = streamsim.run(None, write=False, analyze=False,
                        overrides=[a for a in SMALL if a != "--set"])
    assert set(res.x) == {"electrons", "positrons"}
    assert res.series.t[0] == 0.0 and res.series.t[-1] == pytest.approx(20.0)
    assert res.summary["steps"] == 400 and res.folder is None
    assert res.data.snapshots.density.shape[1:] == (2, 64)


def test_run_is_bit_identical_run_to_run():
    a = streamsim.run(None, write=False, analyze=False, overrides=[x for x in SMALL if x != "--set"])
    b = streamsim.run(None, write=False, analyze=False, overrides=[x for x in SMALL if x != "--set"])
    for name in a.x:
        assert np.array_equal(a.x[name], b.x[name]) and np.array_equal(a.u[name], b.u[name])
    assert np.array_equal(a.series.field_energy, b.series.field_energy)
