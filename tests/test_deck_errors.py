"""Every bad deck gets one clear line naming the key, exit status 2, no traceback, no folder."""
from __future__ import annotations

import copy
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest
import tomli_w
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from streamsim.cli import main
from streamsim.deck import DEFAULT_DECK, DeckError, load_deck

BASE = tomllib.loads(DEFAULT_DECK)


def _e(raw):
    return raw["species"][0]


def _p(raw):
    return raw["species"][1]


def mut(fn):
    def apply():
        raw = copy.deepcopy(BASE)
        fn(raw)
        return raw
    return apply


# (label, mutation, the key the message must name, a fragment of the reason)
CASES = [
    ("top-level typo", mut(lambda r: r.update(titel="x")), "titel", "did you mean 'title'"),
    ("section typo", mut(lambda r: r.update(bx={"cells": 8})), "bx", "did you mean 'box'"),
    ("box key typo", mut(lambda r: r["box"].update(cell=8)), "box.cell", "did you mean 'cells'"),
    ("species key typo", mut(lambda r: _e(r).update(tehta=0.1)), "species.electrons.tehta", "theta"),
    ("time key typo", mut(lambda r: r["time"].update(ends=3.0)), "time.ends", "did you mean 'end'"),
    ("superluminal drift", mut(lambda r: _p(r).update(drift_beta=1.2)), "species.positrons.drift_beta", "< 1"),
    ("drift exactly c", mut(lambda r: _e(r).update(drift_beta=-1.0)), "species.electrons.drift_beta", "< 1"),
    ("both drifts", mut(lambda r: _e(r).update(drift_u=0.3)), "species.electrons.drift_u", "not both"),
    ("zero density", mut(lambda r: _e(r).update(density=0.0)), "species.electrons.density", "> 0"),
    ("negative density", mut(lambda r: _p(r).update(density=-0.5)), "species.positrons.density", "> 0"),
    ("negative theta", mut(lambda r: _e(r).update(theta=-0.1)), "species.electrons.theta", ">= 0"),
    ("one cell", mut(lambda r: r["box"].update(cells=1)), "box.cells", "between 2"),
    ("fractional cells", mut(lambda r: r["box"].update(cells=2.5)), "box.cells", "integer"),
    ("cells as string", mut(lambda r: r["box"].update(cells="256")), "box.cells", "integer"),
    ("cells as float", mut(lambda r: r["box"].update(cells=256.0)), "box.cells", "write 256"),
    ("zero dt", mut(lambda r: r["time"].update(dt=0.0)), "time.dt", "> 0"),
    ("negative dt", mut(lambda r: r["time"].update(dt=-0.1)), "time.dt", "> 0"),
    ("dt word", mut(lambda r: r["time"].update(dt="fast")), "time.dt", '"auto"'),
    ("zero end", mut(lambda r: r["time"].update(end=0.0)), "time.end", "> 0"),
    ("end as string", mut(lambda r: r["time"].update(end="long")), "time.end", "number"),
    ("dt beyond end", mut(lambda r: r["time"].update(dt=0.5, end=0.1)), "time.dt", "time.end"),
    ("unknown shape", mut(lambda r: r["box"].update(shape="quadratic")), "box.shape", "one of"),
    ("shape in capitals", mut(lambda r: r["box"].update(shape="CIC")), "box.shape", "did you mean 'cic'"),
    ("unknown solver", mut(lambda r: r["box"].update(solver="fft")), "box.solver", "one of"),
    ("too many smoothing passes", mut(lambda r: r["box"].update(smoothing_passes=20)), "box.smoothing_passes", "between"),
    ("length and wavelengths", mut(lambda r: r["box"].update(length=8.0)), "box.fastest_wavelengths", "not both"),
    ("negative length", mut(lambda r: (r["box"].pop("fastest_wavelengths"), r["box"].update(length=-3.0))), "box.length", "> 0"),
    ("zero wavelengths", mut(lambda r: r["box"].update(fastest_wavelengths=0)), "box.fastest_wavelengths", "> 0"),
    ("unknown distribution", mut(lambda r: _e(r).update(distribution="maxwell")), "species.electrons.distribution", "one of"),
    ("loading typo", mut(lambda r: _e(r).update(loading="quite")), "species.electrons.loading", "did you mean 'quiet'"),
    ("no particles", mut(lambda r: _e(r).update(particles_per_cell=0)), "species.electrons.particles_per_cell", "between 1"),
    ("fractional particles", mut(lambda r: _p(r).update(particles_per_cell=1.5)), "species.positrons.particles_per_cell", "integer"),
    ("neutral species", mut(lambda r: _e(r).update(charge=0.0)), "species.electrons.charge", "non-zero"),
    ("massless", mut(lambda r: _e(r).update(mass=0.0)), "species.electrons.mass", "> 0"),
    ("negative mass", mut(lambda r: _p(r).update(mass=-1.0)), "species.positrons.mass", "> 0"),
    ("duplicate names", mut(lambda r: _p(r).update(name="electrons")), "species.electrons.name", "same name"),
    ("missing name", mut(lambda r: _e(r).pop("name")), "species[0].name", "required"),
    ("missing charge", mut(lambda r: _e(r).pop("charge")), "species.electrons.charge", "required"),
    ("missing density", mut(lambda r: _p(r).pop("density")), "species.positrons.density", "required"),
    ("name with slash", mut(lambda r: _e(r).update(name="../etc")), "species.../etc.name", "letter"),
    ("species as a table", mut(lambda r: r.update(species={"name": "e"})), "species", "[[species]]"),
    ("empty species list", mut(lambda r: r.update(species=[])), "species", "at least one"),
    ("no species", mut(lambda r: r.pop("species")), "species", "at least one"),
    ("mode zero", mut(lambda r: r["perturbation"].update(modes=[0])), "perturbation.modes", ">= 1"),
    ("mode beyond Nyquist", mut(lambda r: r["perturbation"].update(modes=[500])), "perturbation.modes", "cells/2"),
    ("amplitude above one", mut(lambda r: r["perturbation"].update(amplitude=1.5)), "perturbation.amplitude", "[0, 1)"),
    ("negative amplitude", mut(lambda r: r["perturbation"].update(amplitude=-0.1)), "perturbation.amplitude", "[0, 1)"),
    ("unknown perturbed species", mut(lambda r: r["perturbation"].update(species=["muons"])), "perturbation.species", "no species named"),
    ("amplitude without modes", mut(lambda r: r["perturbation"].update(modes=[])), "perturbation.modes", "at least one mode"),
    ("zero reference density", mut(lambda r: r["units"].update(density_cm3=0.0)), "units.density_cm3", "> 0"),
    ("negative reference density", mut(lambda r: r["units"].update(density_cm3=-1e10)), "units.density_cm3", "> 0"),
    ("density as string", mut(lambda r: r["units"].update(density_cm3="1e10")), "units.density_cm3", "number"),
    ("negative seed", mut(lambda r: r.update(random_seed=-1)), "random_seed", ">= 0"),
    ("fractional seed", mut(lambda r: r.update(random_seed=1.5)), "random_seed", "integer"),
    ("empty title", mut(lambda r: r.update(title="  ")), "title", "empty"),
    ("zero recorded modes", mut(lambda r: r.update(output={"recorded_modes": 0})), "output.recorded_modes", ">= 1"),
    ("too many recorded modes", mut(lambda r: r.update(output={"recorded_modes": 999})), "output.recorded_modes", "cells/2"),
    ("diagnostics faster than dt", mut(lambda r: r.update(output={"diagnostics_interval": 0.001})), "output.diagnostics_interval", "time.dt"),
    ("negative threads", mut(lambda r: r.update(output={"threads": -1})), "output.threads", ">= 0"),
    ("output key typo", mut(lambda r: r.update(output={"folderr": "x"})), "output.folderr", "did you mean 'folder'"),
    ("coherence drop above one", mut(lambda r: r.update(analysis={"coherence_drop": 1.5})), "analysis.coherence_drop", "(0, 1)"),
    ("bulk gamma below one", mut(lambda r: r.update(analysis={"bulk_gamma": 0.5})), "analysis.bulk_gamma", ">= 1"),
    ("waterbag without spread", mut(lambda r: _e(r).update(distribution="waterbag")), "species.electrons.spread_u", "spread_u > 0"),
    ("cold with theta", mut(lambda r: _e(r).update(distribution="cold", theta=0.01)), "species.electrons.theta", "cold"),
    ("spread on juttner", mut(lambda r: _e(r).update(distribution="juttner", theta=0.01, spread_u=0.1)), "species.electrons.spread_u", "waterbag"),
    ("box not a table", mut(lambda r: r.update(box=5)), "box", "table"),
    ("theta as boolean", mut(lambda r: _e(r).update(theta=True)), "species.electrons.theta", "number"),
    ("drift infinite", mut(lambda r: (_e(r).pop("drift_beta"), _e(r).update(drift_u=float("inf")))), "species.electrons.drift_u", "finite"),
    # renamed keys name their new name
    ("old diagnostics key", mut(lambda r: r.update(output={"diagnostics_every": 0.1})), "output.diagnostics_every", "renamed; use output.diagnostics_interval"),
    ("old fields key", mut(lambda r: r.update(output={"fields_every": 1.0})), "output.fields_every", "renamed; use output.fields_interval"),
    ("old phase-space key", mut(lambda r: r.update(output={"phase_space_every": 1.0})), "output.phase_space_every", "renamed; use output.phase_space_interval"),
    ("old checkpoint key", mut(lambda r: r.update(output={"checkpoint_every": 1.0})), "output.checkpoint_every", "renamed; use output.checkpoint_interval"),
    ("old filter key", mut(lambda r: r["box"].update(filter_passes=1)), "box.filter_passes", "renamed; use box.smoothing_passes"),
    # physical-unit alternatives are exclusive with their normalised twins
    ("length_cm and wavelengths", mut(lambda r: r["box"].update(length_cm=40.0)), "box.fastest_wavelengths", "not both"),
    ("length and length_cm", mut(lambda r: (r["box"].pop("fastest_wavelengths"), r["box"].update(length=8.0, length_cm=40.0))), "box.length_cm", "not both"),
    ("negative length_cm", mut(lambda r: (r["box"].pop("fastest_wavelengths"), r["box"].update(length_cm=-4.0))), "box.length_cm", "> 0"),
    ("theta and keV", mut(lambda r: _e(r).update(temperature_kev=1.0)), "species.electrons.temperature_kev", "not both"),
    ("negative keV", mut(lambda r: (_e(r).pop("theta"), _e(r).update(temperature_kev=-1.0))), "species.electrons.temperature_kev", ">= 0"),
    ("cold with keV", mut(lambda r: (_e(r).pop("theta"), _e(r).update(distribution="cold", temperature_kev=1.0))), "species.electrons.temperature_kev", "cold"),
]


def test_table_has_all_its_cases():
    # pinned: a case dropped from (or added to) the table must change this number on purpose
    assert len(CASES) == 79
    assert len({c[0] for c in CASES}) == len(CASES)          # each case named once


def _run_cli(tmp_path, capsys, text: str, extra=()):
    deck = tmp_path / "deck.toml"
    deck.write_text(text)
    out = tmp_path / "out"
    rc = main(["run", str(deck), "--quiet", "--out", str(out), *extra])
    err = capsys.readouterr().err
    return rc, err, out


@pytest.mark.parametrize("label,make,key,reason", CASES, ids=[c[0] for c in CASES])
def test_malformed_deck(label, make, key, reason, tmp_path, capsys):
    rc, err, out = _run_cli(tmp_path, capsys, tomli_w.dumps(make()))
    lines = err.strip().splitlines()
    assert rc == 2
    assert len(lines) == 1, err
    assert lines[0].startswith(f"deck error: {key}"), lines[0]
    assert reason in lines[0]
    assert not out.exists()


def test_toml_syntax_error_reports_line_and_column(tmp_path, capsys):
    text = DEFAULT_DECK.replace("cells = 256", "cells = = 256")
    rc, err, out = _run_cli(tmp_path, capsys, text)
    assert rc == 2 and len(err.strip().splitlines()) == 1
    assert "line 13, column" in err and "not valid TOML" in err


def test_missing_deck_file(tmp_path, capsys):
    rc = main(["run", str(tmp_path / "nope.toml"), "--quiet", "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err
    assert rc == 2 and "no such deck file" in err and len(err.strip().splitlines()) == 1


@pytest.mark.parametrize("override,key", [
    ("species.electrons.theta=-1", "species.electrons.theta"),
    ("species.muons.theta=0.1", "species.muons.theta"),
    ("box.shape=tsc", "box.shape"),                      # bare word: not a TOML literal
    ("box.cells", "box.cells"),                          # no value
    ("boxx.cells=8", "boxx.cells"),
    ("time.dt=__import__('os')", "time.dt"),             # never evaluated
])
def test_bad_overrides(override, key, tmp_path, capsys):
    rc = main(["run", "--quiet", "--out", str(tmp_path / "o"), "--set", override])
    err = capsys.readouterr().err
    assert rc == 2 and err.startswith(f"deck error: {key}") and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "o").exists()


def test_cli_subprocess_gives_no_traceback(tmp_path):
    """The installed command path: exit 2, one line, no 'Traceback'."""
    deck = tmp_path / "d.toml"
    raw = copy.deepcopy(BASE)
    raw["species"][1]["drift_beta"] = 1.2
    deck.write_text(tomli_w.dumps(raw))
    proc = subprocess.run([sys.executable, "-m", "streamsim.cli", "run", str(deck), "--out",
                           str(tmp_path / "o")], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert proc.stderr.strip() == ("deck error: species.positrons.drift_beta = 1.2: "
                                   "|drift_beta| must be < 1")
    assert "Traceback" not in proc.stderr and not (tmp_path / "o").exists()


# --------------------------------------------------------------------------------------------
# hypothesis: mutations of valid decks that are always invalid
# --------------------------------------------------------------------------------------------
NUMERIC = [("units", "density_cm3"), ("box", "cells"), ("time", "dt"), ("time", "end"),
           ("box", "fastest_wavelengths"), ("perturbation", "amplitude")]
SPECIES_NUMERIC = ["charge", "mass", "density", "drift_beta", "theta", "particles_per_cell"]
POSITIVE = [("units", "density_cm3"), ("time", "end"), ("box", "fastest_wavelengths")]
SPECIES_POSITIVE = ["mass", "density", "particles_per_cell"]
wrong_type = st.one_of(st.text(max_size=5), st.lists(st.integers(), max_size=2),
                       st.dictionaries(st.sampled_from(["a", "b"]), st.integers(), max_size=1),
                       st.booleans())
letters = st.sampled_from("abcdefghijklmnopqrstuvwxyz_")


@st.composite
def broken_deck(draw):
    raw = copy.deepcopy(BASE)
    kind = draw(st.sampled_from(["type", "species_type", "typo", "species_typo", "negative",
                                 "species_negative", "superluminal"]))
    sp = draw(st.sampled_from([0, 1]))
    name = raw["species"][sp]["name"]
    if kind == "type":
        sec, key = draw(st.sampled_from(NUMERIC))
        value = draw(wrong_type)
        if sec == "time" and key == "dt" and value == "auto":
            value = "fast"
        raw[sec][key] = value
        return raw, f"{sec}.{key}"
    if kind == "species_type":
        key = draw(st.sampled_from(SPECIES_NUMERIC))
        raw["species"][sp][key] = draw(wrong_type)
        return raw, f"species.{name}.{key}"
    if kind in ("typo", "species_typo"):
        if kind == "typo":
            sec = draw(st.sampled_from(["box", "time", "units"]))
            table = raw[sec]
        else:
            table = raw["species"][sp]
        key = draw(st.sampled_from(sorted(k for k in table if k != "name")))
        pos = draw(st.integers(0, len(key)))
        bad = key[:pos] + draw(letters) + key[pos:]
        from streamsim import deck as deckmod
        schema = {"box": deckmod._BOX, "time": deckmod._TIME, "units": deckmod._UNITS}.get(
            sec if kind == "typo" else "", deckmod._SPECIES)
        if bad in schema:
            bad = bad + "zz"
        table[bad] = table.pop(key)
        prefix = sec if kind == "typo" else f"species.{name}"
        return raw, f"{prefix}.{bad}"
    if kind == "negative":
        sec, key = draw(st.sampled_from(POSITIVE))
        raw[sec][key] = -draw(st.floats(0, 1e6, allow_nan=False))
        return raw, f"{sec}.{key}"
    if kind == "species_negative":
        key = draw(st.sampled_from(SPECIES_POSITIVE))
        v = -draw(st.integers(0, 10**6))
        raw["species"][sp][key] = v if key == "particles_per_cell" else float(v)
        return raw, f"species.{name}.{key}"
    raw["species"][sp]["drift_beta"] = draw(st.floats(1.0, 1e9, allow_nan=False)) * draw(st.sampled_from([1, -1]))
    return raw, f"species.{name}.drift_beta"


@settings(max_examples=300, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(broken_deck())
def test_mutated_decks_name_the_key(case):
    raw, key = case
    with pytest.raises(DeckError) as info:
        load_deck(raw)
    line = str(info.value)
    assert "\n" not in line
    assert line.startswith(key), (line, key)


def test_scan_file_given_as_deck_says_so(tmp_path, capsys):
    scan = Path(__file__).resolve().parents[1] / "runs" / "density-scan.toml"
    rc = main(["run", str(scan), "--quiet", "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2 and len(err) == 1 and "looks like a scan file" in err[0]


def test_negative_threads_and_nothing_to_resume(tmp_path, capsys):
    assert main(["run", "--quiet", "--out", str(tmp_path / "o"), "--threads", "-3"]) == 2
    assert "--threads must be >= 0" in capsys.readouterr().err
    assert main(["run", "--quiet", "--resume", str(tmp_path / "none")]) == 4
    assert "nothing to resume" in capsys.readouterr().err
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("override,new", [
    ("output.fields_every=1.0", "output.fields_interval"),
    ("box.filter_passes=2", "box.smoothing_passes"),
])
def test_renamed_keys_via_set_exit_2_naming_the_new_key(override, new, tmp_path, capsys):
    rc = main(["run", "--quiet", "--out", str(tmp_path / "o"), "--set", override])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2 and len(err) == 1 and err[0].endswith(f"renamed; use {new}")
    assert not (tmp_path / "o").exists()


# --------------------------------------------------------------------------------------------
# defaults, validation and resolution
# --------------------------------------------------------------------------------------------
def test_short_run_with_default_cadences_loads():
    """time.end = 0.4 with dt = 0.05: the defaults end/20 and end/8 would undercut dt; a
    default is clamped to the step, only a value the user gave below dt is an error."""
    deck = load_deck(None, ["time.end=0.4", "time.dt=0.05"])
    o = deck.output
    assert o.fields_interval == 0.05 and o.diagnostics_interval == 0.05
    assert o.phase_space_interval == 0.05
    assert o.checkpoint_interval is None     # unset: checkpoints on wall-clock time
    with pytest.raises(DeckError) as info:
        load_deck(None, ["time.end=0.4", "time.dt=0.05", "output.fields_interval=0.02"])
    assert str(info.value) == "output.fields_interval = 0.02: must be >= time.dt = 0.05"


def test_user_cadences_are_kept_and_long_run_defaults_follow_end():
    deck = load_deck(None, ["output.fields_interval=2.5", "output.checkpoint_interval=0"])
    assert deck.output.fields_interval == 2.5 and deck.output.checkpoint_interval == 0.0
    assert deck.output.phase_space_interval == 60.0 / 8      # end/8 of the default deck


def test_auto_dt_for_a_run_shorter_than_its_step_takes_one_step():
    deck = load_deck(None, ["time.dt='auto'", "time.end=0.01"])
    assert deck.time.dt == 0.01 and deck.time.steps == 1


def test_default_deck_is_package_data_and_equals_runs_pair_beams():
    from importlib.resources import files
    root = Path(__file__).resolve().parents[1]
    text = files("streamsim").joinpath("data").joinpath("default.toml").read_text(encoding="utf-8")
    assert text == DEFAULT_DECK
    assert tomllib.loads(DEFAULT_DECK) == tomllib.loads(
        (root / "runs" / "pair-beams.toml").read_text(encoding="utf-8"))
    assert load_deck(None) == load_deck(root / "runs" / "pair-beams.toml")


def test_validate_leaves_derived_values_open_and_resolve_fills_them():
    from streamsim.deck import resolve, validate
    raw = copy.deepcopy(BASE)
    raw["time"]["dt"] = "auto"
    raw["species"][0].pop("theta")
    raw["species"][0]["temperature_kev"] = 0.5
    raw["species"][0]["distribution"] = "juttner"
    bare = validate(raw)
    assert not bare.is_resolved
    assert bare.box.length is None and bare.time.dt is None and bare.species[0].theta is None
    assert bare.output.fields_interval is None and bare.output.checkpoint_interval is None
    deck = resolve(bare)
    assert deck.is_resolved and deck == load_deck(raw)
    assert resolve(deck) == deck                       # resolving twice changes nothing
    assert load_deck(deck.to_dict()) == deck           # the resolved deck reloads to the same run
    assert load_deck(tomllib.loads(deck.to_toml())) == deck


def test_errors_share_one_class_and_formatter():
    from streamsim.deck import InputError, did_you_mean, show_value
    from streamsim.scan import ScanError
    assert issubclass(DeckError, InputError) and issubclass(ScanError, InputError)
    assert show_value(1e9) == "1e9" and show_value(0.05) == "0.05" and show_value("x") == "'x'"
    assert did_you_mean("cels", ["cells", "shape"]) == "unknown key; did you mean 'cells'?"
    assert str(DeckError("time.end", "too long", 1e9)) == "time.end = 1e9: too long"


# --------------------------------------------------------------------------------------------
# memory estimate and refusal
# --------------------------------------------------------------------------------------------
GIB = 2**30


def test_memory_estimate_counts_the_arrays():
    """Bytes counted by hand for the default deck (float64 = 8 B, complex128 = 16 B)."""
    from streamsim import memory
    deck = load_deck(None)
    est = memory.estimate(deck)
    n = 2 * 128 * 256                                   # 2 species x ppc x cells
    assert est["particles"] == n * 3 * 8                # x, u + peak copy of x
    steps = 1200                                        # 60 / 0.05
    # t, kin, W_E, mom, max, rms; the E modes; the density modes of both species
    per_record = 8 * (1 + 2 + 1 + 2 + 3 + 3) + 16 * 64 + 16 * 2 * 64
    # records: step 0 and every stride-th step (the last one included when it falls on it)
    assert est["time_series"] == (steps // 2 + 1) * per_record          # every 0.1 = 2 steps
    assert est["field_snapshots"] == (steps // 60 + 1) * (3 * 256 * 8 + 8)  # every 3.0
    assert est["phase_space"] == (steps // 150 + 1) * (2 * 8 * 2 * 4096 + 8)
    assert "drive" not in est                           # an undriven deck records no drive
    assert est["total"] == sum(v for k, v in est.items() if k != "total")
    assert memory.check(deck, available_bytes=64 * GIB) == est


def test_memory_refusal_for_a_very_long_run(tmp_path, capsys):
    from streamsim import memory
    deck = load_deck(None, ["time.end=1e9"])
    with pytest.raises(memory.MemoryRefusal) as info:
        memory.check(deck, available_bytes=23 * GIB)
    line = str(info.value)
    assert isinstance(info.value, DeckError) and "\n" not in line
    # (2e10 // 2 + 1) records x (1120 + 2048 for the density modes) bytes = 2.95e4 GiB
    need = (int(1e9 / 0.05) // 2 + 1) * 3168 / GIB
    assert line == (f"time.end = 1e9: the time series need {need:.0f} GiB at "
                    "output.diagnostics_interval = 0.1 (available 23 GiB): raise "
                    "output.diagnostics_interval or shorten time.end")


def test_memory_refusal_for_huge_particle_counts():
    from streamsim import memory
    deck = load_deck(None, ["box.cells=65536", "species.electrons.particles_per_cell=1048576"])
    with pytest.raises(memory.MemoryRefusal) as info:
        memory.check(deck, available_bytes=8 * GIB)
    line = str(info.value)
    assert line.startswith("species.electrons.particles_per_cell = 1048576: the particles need ")
    assert "(available 8 GiB)" in line and "lower particles_per_cell or box.cells" in line
    need = (65536 * 1048576 + 65536 * 128) * 24 / GIB
    assert f"need {need:.0f} GiB" in line


def test_memory_available_reads_the_machine():
    from streamsim import memory
    def meminfo():       # MemAvailable, kB (proc(5), Linux man-pages)
        with open("/proc/meminfo") as fh:
            return next(int(ln.split()[1]) * 1024 for ln in fh if ln.startswith("MemAvailable:"))
    before = meminfo()
    avail = memory.memory_available()
    after = meminfo()
    # the machine's memory moves while other processes run: 10 % around the two readings
    assert 0.9 * min(before, after) <= avail <= 1.1 * max(before, after)
