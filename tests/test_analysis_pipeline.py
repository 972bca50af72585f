"""analyze() / terminal lines / figures / the block registry on a synthetic RunData whose content
is prescribed (tests/synthetic_data.py): the checks are against the prescription, never against
output."""
import json
import math

import numpy as np
import pytest

from streamsim import analysis
from streamsim.analysis import analyze
from synthetic_data import synthetic_run

CONTRACT = {"growth": ["mode", "k", "measured", "measured_err", "theory", "ratio", "window"],
            "contrast": ["max", "t_max", "t_unity", "t_unity_ns"],
            "clumps": ["count", "size_median", "size_median_cm"],
            "coherence": ["k_cutoff", "frequency_cutoff_hz", "bulk_gamma", "noise_floor"]}


@pytest.fixture(scope="module")
def synthetic(tmp_path_factory):
    folder = tmp_path_factory.mktemp("synthetic_run")
    data = synthetic_run(seed=3)
    blocks = analyze(data, folder=folder, write=True)
    return data, blocks, folder


def test_contract_keys_and_plain_json(synthetic):
    _, blocks, _ = synthetic
    for block, keys in CONTRACT.items():
        for k in keys:
            assert k in blocks[block], (block, k)
    assert isinstance(blocks["modes"], list) and blocks["modes"]
    assert {"mode", "k", "measured", "measured_err", "theory", "ratio", "window"} <= set(blocks["modes"][0])
    json.dumps(blocks, allow_nan=False)      # no NaN/inf anywhere


def test_prescribed_content_is_recovered(synthetic):
    data, blocks, _ = synthetic
    g = blocks["growth"]
    # prescribed: mode 4 grows fastest at 0.35 (synthetic_run's parabola)
    assert g["mode"] == 4
    assert g["measured"] == pytest.approx(0.35, rel=4e-4)        # measured -1.3e-4
    assert g["ratio"] == pytest.approx(1.0, rel=4e-4)
    # prescribed: 4 Gaussian bunches per species, 2 species
    assert blocks["clumps"]["count"] == 8
    # quantile bunches of rms 0.3 (prescribed): |F|^2 = f^2 exp(-k^2 sigma^2) at the harmonics
    # k = 2 pi 4 j / L of the train, 0 between them (analytic); the envelope cutoff of that
    # analytic spectrum is what the run's particle positions must give
    from streamsim.analysis import coherence as _co
    co = blocks["coherence"]
    M = _co.form_factor_modes(data.cells, data.deck.analysis.coherence_kmax_factor)
    m = np.arange(1, M + 1)
    k = 2 * math.pi * m / data.length
    P = np.where(m % 4 == 0, 0.6 ** 2 * np.exp(-(k * 0.3) ** 2), 0.0)
    kc = _co.envelope_cutoff(k, P, floor=1e-12, drop=0.5, bootstrap=0)["k_cutoff"]
    # 6000 quantile-placed particles per bunch are a Gaussian to ~1e-4 in |F|^2: measured
    # -9.6e-5, checked to 3e-4
    assert co["k_cutoff"] == pytest.approx(kc, rel=3e-4)
    assert co["noise_floor"] == pytest.approx(1 / 40000)
    assert co["bulk_gamma"] == 1.0


def test_times_in_ns_follow_the_plasma_frequency(synthetic):
    _, blocks, _ = synthetic
    # NRL Plasma Formulary: omega_pe = 5.64e4 n^1/2 rad/s (synthetic run at n = 1e10 cm^-3)
    wp = 5.64e4 * math.sqrt(1.0e10)
    g = blocks["growth"]
    assert g["growth_time_ns"] == pytest.approx(1e9 / (g["measured"] * wp), rel=2e-3)
    assert g["growth_time_err_ns"] == pytest.approx(
        g["growth_time_ns"] * g["measured_err"] / g["measured"], rel=1e-9)
    assert g["theory_growth_time_ns"] == pytest.approx(1e9 / (g["theory"] * wp), rel=2e-3)
    c = blocks["contrast"]
    assert c["t_unity_ns"] == pytest.approx(1e9 * c["t_unity"] / wp, rel=2e-3)


def test_options_override_the_deck(synthetic):
    data, blocks, _ = synthetic
    b10 = analyze(data, bulk_gamma=10.0, write=False)
    # nu_c = Gamma c k_c / 2 pi: linear in Gamma (its definition)
    assert b10["coherence"]["frequency_cutoff_hz"] == pytest.approx(
        10 * blocks["coherence"]["frequency_cutoff_hz"], rel=1e-12)
    high = analyze(data, clump_threshold=1e6, write=False)
    assert high["clumps"]["count"] == 0 and high["clumps"]["size_median"] is None
    with pytest.raises(ValueError):
        analyze(data, coherence_drop=1.5, write=False)


def test_files_written(synthetic):
    _, _, folder = synthetic
    import h5py
    for name in ("growth_modes.csv", "contrast.csv", "clumps.csv", "clump_sizes.csv",
                 "density_spectrum.csv", "form_factor.csv"):
        p = folder / "analysis" / name
        assert p.is_file() and len(p.read_text().splitlines()) > 1
    with h5py.File(folder / "analysis.h5", "r") as h:
        assert "clumps/width" in h and "form_factor/k" in h and "growth_modes/measured" in h
        assert h["form_factor"].attrs["unit:k"] == "omega_p/c"
    for name in ("field_energy", "growth_rates", "phase_space", "contrast", "clumps", "coherence"):
        p = folder / "figures" / f"{name}.png"
        assert p.stat().st_size > 5000
        assert p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert not list(folder.rglob("*.tmp"))


def test_terminal_lines_say_plainly_what_is_missing():
    data = synthetic_run(rates=np.full(16, -0.1), contrast_peak=0.2, particles=2000,
                         bunched_fraction=0.0, seed=5)
    data.peak.x = {k: np.random.default_rng(9).random(2000) * data.length for k in data.names}
    results = analysis.compute(data)
    blocks = analysis.summary_entries(results)
    text = analysis.terminal_lines(results)
    # prescribed: every mode decays, so the theory has no growing mode to fit
    assert "no box mode grows in the linear theory" in text
    assert "no clump" in text
    assert "no cutoff above the noise floor" in text
    assert blocks["contrast"]["t_unity"] is None and blocks["coherence"]["k_cutoff"] is None


def test_a_new_block_is_one_module_and_one_registry_line(tmp_path, monkeypatch):
    """A block added to the registry reaches the summary, the tables (CSV and HDF5), the figures
    and the terminal lines without touching anything else."""
    import types

    from streamsim.analysis import base, registry
    from streamsim.analysis.writers import read_tables

    def draw(res, data):
        from streamsim.plots import plt
        fig, ax = plt.subplots()
        ax.plot(res.tables["toy"].col("x"), res.tables["toy"].col("y"))
        return fig

    def compute(ctx):
        x = np.arange(5.0)
        return base.BlockResult("toy", {"toy": {"sum": float(x.sum())}},
                                {"toy": base.Table("toy", {"x": x, "y": x**2},
                                                   units={"x": "c/omega_p"})},
                                [base.Figure("toy.png", "a toy", draw)], ["toy: sum 10"])

    toy = types.SimpleNamespace(NAME="toy", compute=compute, SCAN_COLUMNS=[
        base.ScanColumn(("toy", "sum"), "", "sum of x")])
    monkeypatch.setattr(registry, "BLOCKS", registry.BLOCKS + (toy,))
    monkeypatch.setattr(analysis, "BLOCKS", registry.BLOCKS)
    data = synthetic_run(seed=3, particles=2000)
    results = analysis.compute(data)
    analysis.write_outputs(results, data, tmp_path)
    assert analysis.summary_entries(results)["toy"] == {"sum": 10.0}
    assert "toy: sum 10" in analysis.terminal_lines(results).splitlines()
    assert (tmp_path / "analysis" / "toy.csv").read_text().splitlines()[0] == "x,y"
    back = read_tables(tmp_path / "analysis.h5")["toy"]
    assert back.units == {"x": "c/omega_p"} and list(back.col("y")) == [0, 1, 4, 9, 16]
    assert (tmp_path / "figures" / "toy.png").stat().st_size > 1000
    # the column is named after the summary key it holds (block.key), not by hand
    assert "toy.sum" in [c.name for c in analysis.scan_columns()]


def test_terminal_lines_give_times_in_ns_lengths_in_cm_frequencies_in_ghz():
    """Every rate beside its e-folding time in ns, lengths in cm, frequencies in GHz; the ns
    value printed is 1/(rate omega_pe) with omega_pe = 5.64e4 n^1/2 rad/s (NRL Plasma
    Formulary), at the synthetic run's n = 1e10 cm^-3."""
    import re
    data = synthetic_run(seed=3)
    results = analysis.compute(data)
    lines = analysis.terminal_lines(results).splitlines()
    g = results["growth"].summary["growth"]
    growth = next(line for line in lines if line.startswith("growth, mode"))
    tau = float(re.search(r"e-folding time ([0-9.e+-]+) \+-", growth).group(1))
    assert tau == pytest.approx(1e9 / (g["measured"] * 5.64e4 * math.sqrt(1e10)), rel=5e-3)
    assert re.search(r"theory [0-9.]+ ns", growth)
    assert "ns" in next(line for line in lines if line.startswith("field energy grows"))
    clumps = next(line for line in lines if line.startswith("clumps ("))
    assert " cm" in clumps and " ns" in clumps
    assert " GHz" in next(line for line in lines if "nu_c" in line)
