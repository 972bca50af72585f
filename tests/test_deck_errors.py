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
    ("too many filter passes", mut(lambda r: r["box"].update(filter_passes=20)), "box.filter_passes", "between"),
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
    ("zero recorded modes", mut(lambda r: r.update(output={"modes": 0})), "output.modes", ">= 1"),
    ("too many recorded modes", mut(lambda r: r.update(output={"modes": 999})), "output.modes", "cells/2"),
    ("diagnostics faster than dt", mut(lambda r: r.update(output={"diagnostics_every": 0.001})), "output.diagnostics_every", "time.dt"),
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
]


def test_table_has_at_least_fifty_cases():
    assert len(CASES) >= 50


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


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
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
