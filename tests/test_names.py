"""One name per quantity, units last; scan columns are summary.json keys; a uniform plasma claims
no cutoff.

The names checked here are README's contract (summary.json keys, scan columns); the physics
check is that a spatially uniform plasma is an exact equilibrium of the Vlasov-Poisson system
(any homogeneous f0(u) with zero net charge: no field, no force; e.g. Nicholson 1983,
"Introduction to Plasma Theory", ch. 6), so a noise-free continuum run of one stays uniform to
round-off and has no density structure from which a coherence cutoff could be read.
"""
from __future__ import annotations

import json
import re
import warnings

import pytest

import streamsim
from streamsim.scan.spec import METRIC_PATHS

#: the unit tokens of README ("Units" under summary.json)
UNIT_TOKENS = ("hz", "rad_s", "per_s", "ns", "s", "cm", "per_cm", "cm3", "statv_cm", "statA_cm2",
               "A_m2", "gib")
#: the keys of schema 1 that schema 2 renamed or removed (README "Renamed keys")
OLD_KEYS = {"method", "drift_max", "drift_max_relative", "frequency_cutoff_hz_err",
            "frequency_cutoff_hz_lower_bound", "frequency_cutoff_bound", "t_unity_ns_for_level",
            "t_unity_ns_for_level_err", "e_parallel_max", "e_parallel_max_statv_cm",
            "error_budget", "error_budget_cm", "size_budget_cm", "frequency_cutoff_budget",
            "clump_count", "growth_time_efold_ns", "frequency_cutoff_ghz"}


def _keys(d, path=()):
    if isinstance(d, dict):
        for k, v in d.items():
            yield path + (k,)
            yield from _keys(v, path + (k,))
    elif isinstance(d, list):
        for v in d:
            yield from _keys(v, path)


def _get(d, path):
    for k in path:
        if not isinstance(d, dict) or k not in d:
            return KeyError
        d = d[k]
    return d


def test_every_scan_column_is_named_after_the_summary_key_it_holds():
    # README: block and keys joined by dots, the one rule for every column (no aliases)
    for name, (_, _, path) in METRIC_PATHS.items():
        assert name == ".".join(path), name
    assert len(set(METRIC_PATHS)) == len({tuple(p) for _, _, p in METRIC_PATHS.values()})


@pytest.fixture(scope="module")
def small_run(tmp_path_factory):
    from conftest import pair_deck
    deck = streamsim.load_deck(pair_deck(cells=64, ppc=16, end=30.0))
    return streamsim.run(deck, out=tmp_path_factory.mktemp("run"), figures=False, quiet=True)


def test_summary_json_has_schema_2_names_and_units_last(small_run):
    s = json.loads((small_run.folder / "summary.json").read_text())
    assert s == json.loads(json.dumps(small_run.summary))      # Result.summary = summary.json
    assert s["schema_version"] == 2
    keys = {p[-1] for p in _keys(s)}
    assert not (keys & OLD_KEYS) - {"method"}, keys & OLD_KEYS
    assert s["method"] == "pic"                       # top-level: PIC or Vlasov, nothing else
    assert "method" not in s["growth"] and "method" not in s["field_energy_growth"]
    assert isinstance(s["growth"]["fit"], str)
    assert set(s["momentum"]) == {"error_max", "error_max_relative"}
    unit = "|".join(UNIT_TOKENS)
    mid = [k for k in keys if re.search(rf"_({unit})_", k) and not re.search(rf"_({unit})$", k)]
    assert not mid, f"unit token not last: {mid}"


def test_scan_columns_read_keys_that_a_run_writes(small_run):
    s = small_run.summary
    missing = [name for name, (_, _, path) in METRIC_PATHS.items()
               if not name.startswith("drive.") and _get(s, path) is KeyError]
    assert not missing, missing


def test_uniform_vlasov_plasma_claims_no_cutoff_and_says_so(tmp_path, capsys):
    species = [{"name": n, "charge": q, "density": 0.5, "drift_u": u, "theta": 0.03,
                "distribution": "juttner"}
               for n, q, u in (("electrons", -1.0, 0.4), ("positrons", 1.0, -0.4))]
    deck = streamsim.load_deck({
        "title": "uniform vlasov", "method": "vlasov", "units": {"density_cm3": 2e11},
        "box": {"fastest_wavelengths": 2, "cells": 64}, "time": {"dt": "auto", "end": 10.0},
        "species": species, "vlasov": {"momentum_cells": 64}})   # no [perturbation]
    with warnings.catch_warnings():
        warnings.simplefilter("error")               # no Python warning may reach the terminal
        res = streamsim.run(deck, out=tmp_path / "u", figures=True)
    s = res.summary
    assert s["contrast"]["max"] < 1e-12 and s["contrast"]["uniform"] is True
    co, em = s["coherence"], s["emission"]
    assert co["status"] == "uniform" and em["status"] == "uniform"
    for k in ("k_cutoff", "frequency_cutoff_hz", "frequency_cutoff_lower_bound_hz"):
        assert co[k] is None, k
    assert co["grid_limited"] is False
    from streamsim.analysis import terminal_lines
    text = terminal_lines(res.analysis)
    assert "stayed uniform" in text and "nu_c >=" not in text
    assert "Warning" not in capsys.readouterr().err


def test_analyze_gives_an_old_folder_the_new_run_keys(tmp_path):
    # README "Renamed keys": analyze rewrites summary.json; the run's own momentum keys of
    # schema 1 get their schema-2 names and schema_version becomes 2
    from streamsim import io
    old = {"streamsim_version": "0.1.0", "momentum": {"drift_max": 1e-15,
                                                      "drift_max_relative": 2e-11}}
    (tmp_path / "summary.json").write_text(json.dumps(old))
    io.update_summary(tmp_path, {"growth": {"fit": "straight_window"}})
    s = json.loads((tmp_path / "summary.json").read_text())
    assert s["schema_version"] == 2
    assert s["momentum"] == {"error_max": 1e-15, "error_max_relative": 2e-11}
    assert s["growth"] == {"fit": "straight_window"}
