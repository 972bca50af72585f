"""The openPMD series of a run sits in a subfolder of its own, which openPMD-viewer (with its h5py
and its openpmd-api backends) opens as it is: every mesh and particle record at every iteration
equals what the run held in memory, converted to SI. Folders of the older layout (fields.h5 at the
top) still read."""
from __future__ import annotations

import json
import math
import shutil

import numpy as np
import pytest
import scipy.constants as sc

import streamsim
from conftest import pair_deck
from streamsim import io
from streamsim.cli import main

DENSITY_CM3 = 1.0e10            # pair_deck's units.density_cm3
#: streamsim takes omega_p in Gaussian units (4 pi n e^2 / m_e), this test in SI (n e^2 / eps0 m_e);
#: since the 2019 SI, mu0 / (4 pi 1e-7 H/m) - 1 = 5.5e-10 (CODATA 2018), so the two agree to ~1e-10
SI_RTOL = 1e-9


def _si(density_cm3):
    """SI value of one normalised unit, from the textbook plasma frequency
    omega_p = sqrt(n e^2 / (eps0 m_e)) (NRL Plasma Formulary) and CODATA constants (scipy)."""
    n = density_cm3 * 1.0e6
    wp = math.sqrt(n * sc.e**2 / (sc.epsilon_0 * sc.m_e))
    return {"time": 1.0 / wp, "length": sc.c / wp, "efield": sc.m_e * sc.c * wp / sc.e,
            "density": n, "rho": sc.e * n}


def _backends():
    out = ["h5py"]
    try:
        import openpmd_api  # noqa: F401
        out.append("openpmd-api")
    except ImportError:
        pass
    return out


def _series(run_folder, backend):
    viewer = pytest.importorskip("openpmd_viewer")
    return viewer.OpenPMDTimeSeries(str(run_folder / io.OPENPMD_FOLDER), backend=backend,
                                    check_all_files=False)


@pytest.fixture(scope="module")
def pic_run(tmp_path_factory):
    """A small pair-beam run whose field and phase-space cadences differ (0.5 and 0.75)."""
    raw = pair_deck(cells=32, ppc=8, end=4.0, nwaves=2)
    raw["output"].update(fields_interval=0.5, phase_space_interval=0.75,
                         phase_space_particles=50)
    out = tmp_path_factory.mktemp("openpmd") / "run"
    res = streamsim.run(raw, out=out, threads=1, analyze=False, figures=False)
    return out, res


def test_the_openpmd_folder_holds_the_series_and_nothing_else(pic_run):
    out, _ = pic_run
    assert sorted(p.name for p in (out / io.OPENPMD_FOLDER).iterdir()) == ["fields.h5"]
    assert not (out / io.LEGACY_FIELDS).exists()


@pytest.mark.parametrize("backend", _backends())
def test_viewer_lists_every_iteration_at_its_time(pic_run, backend):
    out, res = pic_run
    dt = res.deck.time.dt
    expected = sorted({int(round(t / dt)) for t in res.data.snapshots.t}
                      | {int(round(t / dt)) for t in res.data.phase_space.t})
    ts = _series(out, backend)
    assert list(ts.iterations) == expected
    np.testing.assert_allclose(ts.t, np.array(expected) * dt * _si(DENSITY_CM3)["time"],
                               rtol=SI_RTOL)


@pytest.mark.parametrize("backend", _backends())
def test_viewer_reads_every_mesh_at_every_field_iteration(pic_run, backend):
    out, res = pic_run
    si = _si(DENSITY_CM3)
    snaps, dt = res.data.snapshots, res.deck.time.dt
    charges = np.array([s.charge for s in res.deck.species])
    ts = _series(out, backend)
    assert sorted(ts.avail_fields) == ["E", "density_electrons", "density_positrons", "rho"]
    assert len(snaps.t) == 9                               # t = 0, 0.5, ..., 4
    for i, t in enumerate(snaps.t):
        it = int(round(t / dt))
        e, info = ts.get_field("E", "x", iteration=it)
        np.testing.assert_allclose(e, snaps.efield[i] * si["efield"], rtol=SI_RTOL, atol=0)
        np.testing.assert_allclose(info.x, np.arange(32) * res.deck.box.dx * si["length"],
                                   rtol=SI_RTOL)
        rho, _ = ts.get_field("rho", iteration=it)
        # rho = e n_ref sum_s q_s n_s (the pair charge nearly cancels: an absolute floor)
        np.testing.assert_allclose(rho, charges @ snaps.density[i] * si["rho"], rtol=1e-12,
                                   atol=1e-12 * si["rho"])
        for s, sp in enumerate(res.deck.species):
            n, _ = ts.get_field(f"density_{sp.name}", iteration=it)
            np.testing.assert_allclose(n, snaps.density[i, s] * si["density"], rtol=1e-12)


@pytest.mark.parametrize("backend", _backends())
def test_viewer_reads_every_particle_record_at_every_phase_iteration(pic_run, backend):
    out, res = pic_run
    si = _si(DENSITY_CM3)
    phase, dt, deck = res.data.phase_space, res.deck.time.dt, res.deck
    ts = _series(out, backend)
    assert sorted(ts.avail_species) == ["electrons", "positrons"]
    assert len(phase.t) == 7                               # t = 0, 0.75, ..., 3.75 and the end
    for i, t in enumerate(phase.t):
        it = int(round(t / dt))
        for s, sp in enumerate(deck.species):
            x, ux, w = ts.get_particle(["x", "ux", "w"], species=sp.name, iteration=it)
            np.testing.assert_allclose(x, phase.x[sp.name][i] * si["length"], rtol=SI_RTOL)
            # u = gamma beta: the viewer divides the momentum by m c
            np.testing.assert_allclose(ux, phase.u[sp.name][i], rtol=1e-12)
            # the subsample stands for every real particle of the species per unit area:
            # sum w = n_s L (number per m^2 of a 1D slab)
            assert w.sum() == pytest.approx(sp.density * si["density"] * deck.box.length
                                            * si["length"], rel=SI_RTOL)


def _old_layout(src, dst):
    """A copy of run folder ``src`` as an older streamsim wrote it: fields.h5 at the top."""
    shutil.copytree(src, dst)
    (dst / io.FILES["fields"]).rename(dst / io.LEGACY_FIELDS)
    (dst / io.OPENPMD_FOLDER).rmdir()
    return dst


def test_an_old_folder_reads_the_same(pic_run, tmp_path):
    out, res = pic_run
    old = _old_layout(out, tmp_path / "old")
    assert io.fields_path(old) == old / io.LEGACY_FIELDS
    data = io.read_run(old)
    for a, b in ((data.snapshots.t, res.data.snapshots.t),
                 (data.snapshots.efield, res.data.snapshots.efield),
                 (data.snapshots.density, res.data.snapshots.density),
                 (data.phase_space.t, res.data.phase_space.t)):
        assert np.array_equal(a, b)
    for name in res.data.names:
        assert np.array_equal(data.phase_space.x[name], res.data.phase_space.x[name])
        assert np.array_equal(data.phase_space.u[name], res.data.phase_space.u[name])


def test_analyze_and_plot_read_an_old_folder(pic_run, tmp_path, capsys):
    out, res = pic_run
    old = _old_layout(out, tmp_path / "old")
    assert main(["analyze", str(old), "--no-figures", "--json"]) == 0
    blocks = json.loads(capsys.readouterr().out)
    assert "contrast" in blocks
    # the contrast maximum comes from the field snapshots read back from the old place
    assert main(["plot", str(old)]) == 0
    assert (old / "figures").is_dir()


def test_a_resume_in_an_old_folder_moves_the_series_into_the_subfolder(pic_run, tmp_path):
    out, res = pic_run
    old = _old_layout(out, tmp_path / "old")
    again = streamsim.run(old / io.FILES["deck"], out=old, resume=True, threads=1,
                          analyze=False, figures=False)
    assert (old / io.FILES["fields"]).is_file() and not (old / io.LEGACY_FIELDS).exists()
    snaps = io.read_run(old).snapshots
    assert np.array_equal(snaps.efield, res.data.snapshots.efield)
    assert np.array_equal(again.data.snapshots.efield, res.data.snapshots.efield)


@pytest.fixture(scope="module")
def vlasov_run(tmp_path_factory):
    small = ["box.cells=32", "box.fastest_wavelengths=1", "perturbation.modes=[1]",
             "time.end=12.0", "vlasov.momentum_cells=64", "output.fields_interval=4.0"]
    out = tmp_path_factory.mktemp("openpmd-vlasov") / "run"
    res = streamsim.run("runs/warm-pair-beams-vlasov.toml", out=out, overrides=small,
                        threads=1, analyze=False, figures=False)
    return out, res


@pytest.mark.parametrize("backend", _backends())
def test_viewer_reads_the_continuum_f_meshes(vlasov_run, backend):
    out, res = vlasov_run
    n_si = res.deck.units.density_cm3 * 1.0e6
    dist, dt = res.data.extra["distribution"], res.deck.time.dt
    ts = _series(out, backend)
    assert len(dist["t"]) == 4                             # t = 0, 4, 8, 12
    for i, t in enumerate(dist["t"]):
        it = int(round(t / dt))
        for s, sp in enumerate(res.deck.species):
            f, info = ts.get_field(f"f_{sp.name}", iteration=it)
            # f du is a number density: f in SI is n_ref / (m_e c) per unit of u
            np.testing.assert_allclose(f, dist["f"][s][i] * n_si / (sc.m_e * sc.c), rtol=1e-12)


def test_continuum_f_round_trips_from_both_layouts(vlasov_run, tmp_path):
    out, res = vlasov_run
    mine = res.data.extra["distribution"]
    for folder in (out, _old_layout(out, tmp_path / "old")):
        back = io.read_run(folder).extra["distribution"]
        assert np.array_equal(back["t"], mine["t"])
        for a, b in zip(back["f"], mine["f"]):
            assert np.array_equal(a, b)
        for ga, gb in zip(back["grids"], mine["grids"]):
            assert (ga.u_min, ga.cells) == (gb.u_min, gb.cells)
            assert ga.du == pytest.approx(gb.du, rel=1e-12)
