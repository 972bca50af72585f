"""Each deck key declared once; renamed keys; species.* overrides in every command; advice that
names a slipped input; exit statuses mapped once from the exception families."""
from __future__ import annotations

import copy
import dataclasses
import tomllib

import pytest
import tomli_w

from streamsim import deck as deckmod
from streamsim.cli import main
from streamsim.deck import DEFAULT_DECK, DeckError, load_deck

BASE = tomllib.loads(DEFAULT_DECK)


def _one_line(capsys):
    err = capsys.readouterr().err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    return lines[0]


# --------------------------------------------------------------------------------------------
# one declaration per key
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("section", sorted(deckmod.SECTIONS))
def test_section_keys_are_the_declared_fields(section):
    """The key table of a section is exactly its fields declared with deck_key (plus the
    read-only INPUT_KEYS), in declaration order."""
    cls = deckmod.schema.SECTION_CLASSES[section]
    declared = [f.name for f in dataclasses.fields(cls) if "deck" in f.metadata]
    declared += list(getattr(cls, "INPUT_KEYS", {}))
    assert list(deckmod.SECTIONS[section]) == declared


def test_written_deck_holds_only_declared_keys():
    """to_dict is derived from the declarations: every key it writes is a declared key."""
    d = load_deck("runs/drive-below-limit.toml").to_dict()
    for name, value in d.items():
        if isinstance(value, dict):
            assert set(value) <= set(deckmod.SECTIONS[name]), name
        elif name == "species":
            for s in value:
                assert set(s) <= set(deckmod.SPECIES)
        else:
            assert name in deckmod.TOP


def test_a_new_key_is_one_field(monkeypatch):
    """A key added as one field of its section is validated, defaulted, range-checked,
    written by to_dict and known to --set, with no other edit (the DEVELOPERS.md recipe)."""
    import importlib
    from streamsim.deck import keys, schema
    validate = importlib.import_module("streamsim.deck.validate")
    fields = [(f.name, f.type, f) for f in dataclasses.fields(schema.Analysis)]
    fields.append(("window_fraction", float, keys.deck_key(
        "float", 0.5, field_default=0.5, check=keys.between(0, 1),
        help="fraction of the run after saturation used by a window")))
    New = dataclasses.make_dataclass("Analysis", fields, frozen=True)
    tables = dict(schema.SECTION_CLASSES, analysis=New)
    sections = {n: keys.schema_of(c) for n, c in tables.items()}
    monkeypatch.setattr(schema, "SECTION_CLASSES", tables)
    monkeypatch.setattr(schema, "SECTIONS", sections)
    monkeypatch.setattr(validate, "SECTION_CLASSES", tables)
    monkeypatch.setattr(validate, "SECTIONS", sections)
    assert load_deck().analysis.window_fraction == 0.5
    assert load_deck(None, ["analysis.window_fraction=0.25"]).to_dict()["analysis"][
        "window_fraction"] == 0.25
    with pytest.raises(DeckError, match="analysis.window_fraction = 2.0: must be between 0 and 1"):
        load_deck(None, ["analysis.window_fraction=2.0"])
    schema.check_key_path(["analysis", "window_fraction"])


def test_exclusive_groups_come_from_one_table():
    """--set, scan axes and validation read the same groups."""
    for g in deckmod.EXCLUSIVE:
        for k in g.keys:
            others = deckmod.exclusive_keys(f"{g.section}.{k}")
            assert set(others) == {f"{g.section}.{o}" for o in g.keys if o != k}
    raw = copy.deepcopy(BASE)
    raw["box"]["length"] = 8.0          # the default deck gives fastest_wavelengths
    with pytest.raises(DeckError, match="box.fastest_wavelengths.*not both"):
        load_deck(raw)
    # --set of one form drops the others
    assert load_deck(raw, ["box.length=9.0"]).box.length == 9.0


# --------------------------------------------------------------------------------------------
# renamed keys
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("section, old, new, value", [
    ("output", "modes", "output.recorded_modes", 4),
    ("output", "fields_every", "output.fields_interval", 1.0),
    ("box", "filter_passes", "box.smoothing_passes", 1),
])
def test_renamed_key_in_a_deck_names_the_new_key(section, old, new, value, tmp_path, capsys):
    raw = copy.deepcopy(BASE)
    raw.setdefault(section, {})[old] = value
    deck = tmp_path / "d.toml"
    deck.write_text(tomli_w.dumps(raw))
    rc = main(["theory", str(deck)])
    assert rc == 2
    assert _one_line(capsys) == f"deck error: {section}.{old}: renamed; use {new}"


def test_renamed_drive_frequency_names_angular_frequency(tmp_path, capsys):
    rc = main(["theory", "runs/drive-below-limit.toml", "--set", 'drive.profile="sine"',
               "--set", "drive.frequency=0.5"])
    assert rc == 2
    assert _one_line(capsys) == ("deck error: drive.frequency: renamed; use "
                                 "drive.angular_frequency")


def test_a_deck_streamsim_wrote_under_the_old_names_still_reads(tmp_path):
    """deck.toml of an earlier run folder (written by streamsim, with output.modes) loads to
    the same deck; the same text without the written-by line is a person's deck and gets the
    renamed-key error."""
    deck = load_deck()
    text = deck.to_toml().replace("recorded_modes = ", "modes = ")
    assert text.startswith(deckmod.reading.WRITTEN_MARK)
    old = tmp_path / "deck.toml"
    old.write_text(text)
    assert load_deck(old) == deck
    mine = tmp_path / "mine.toml"
    mine.write_text("\n".join(line for line in text.splitlines() if not line.startswith("#")))
    with pytest.raises(DeckError, match="renamed; use output.recorded_modes"):
        load_deck(mine)


# --------------------------------------------------------------------------------------------
# --set species.*.KEY=VALUE in every command
# --------------------------------------------------------------------------------------------
def test_species_wildcard_override_sets_every_species():
    d = load_deck(None, ["species.*.particles_per_cell=32", "species.*.temperature_kev=0.5"])
    assert [s.particles_per_cell for s in d.species] == [32, 32]
    assert [s.temperature_kev for s in d.species] == [0.5, 0.5]
    # the exclusive partner (theta) was dropped in every species, so this is no conflict
    assert all(s.theta > 0 for s in d.species)


@pytest.mark.parametrize("command", [
    ["run", "--quiet", "--no-analysis"], ["theory"], ["compare", "runs/warm-pair-beams.toml"],
    ["converge"],
])
def test_species_wildcard_reaches_the_deck_in_every_command(command, tmp_path, capsys):
    """A value out of range set through species.* is refused naming the first species, the
    proof that the override reached the deck (it used to stop at "not a deck key")."""
    rc = main(command + ["--out", str(tmp_path / "o")] * (command[0] != "theory")
              + ["--set", "species.*.theta=-1.0"])
    assert rc == 2
    line = _one_line(capsys)
    assert line.startswith("deck error: species.electrons.theta = -1.0: must be >= 0"), line
    assert not (tmp_path / "o").exists()


def test_species_wildcard_in_theory_runs(capsys):
    import json
    rc = main(["theory", "--json", "--set", "species.*.theta=1e-3"])
    assert rc == 0
    d = json.loads(capsys.readouterr().out)
    assert d["fastest"] is not None


# --------------------------------------------------------------------------------------------
# advice that names the slipped input
# --------------------------------------------------------------------------------------------
SLIP_DENSITY = ["--set", "units.density_cm3=3e18", "--set", "box.length_cm=40.0"]


@pytest.mark.parametrize("command", [["theory"], ["run", "--quiet"]])
def test_density_in_m3_is_named_by_theory_and_run(command, tmp_path, capsys):
    """1e6 too large a density with the box in cm makes the box 1e3 longer in c/omega_p
    (skin depth proportional to n^-1/2): the message names the density and the m^-3 slip."""
    extra = ["--out", str(tmp_path / "o")] if command[0] == "run" else []
    rc = main(command + ["runs/band-pair-beams.toml"] + extra + SLIP_DENSITY)
    assert rc == 2
    line = _one_line(capsys)
    assert line.startswith("deck error: units.density_cm3 = "), line
    assert "m^-3" in line and "units.density_cm3 = 3e+12" in line
    assert not (tmp_path / "o").exists()


def test_plain_density_in_cm3_passes():
    """The same deck at the density it was written for needs no advice."""
    d = load_deck("runs/band-pair-beams.toml", ["box.length_cm=40.0"])
    assert d.box.cells == 256


def test_temperature_in_ev_is_named(capsys):
    """kT = 1000 keV is theta ~ 1.96 (m c^2 = 511 keV, CODATA): the pair beams at 0.1 c are
    then stable and there is no fastest mode; the message names the temperature and eV."""
    rc = main(["theory", "runs/warm-pair-beams.toml", "--set", "species.*.temperature_kev=1000"])
    assert rc == 2
    line = _one_line(capsys)
    assert line.startswith("deck error: species.electrons.temperature_kev = 1000.0: theta"), line
    assert "1.96" in line and "eV" in line and "temperature_kev = 1" in line


# --------------------------------------------------------------------------------------------
# analyze FILE
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("command", ["analyze", "plot"])
def test_analyze_on_a_file_says_it_is_a_file(command, tmp_path, capsys):
    f = tmp_path / "deck.toml"
    f.write_text(DEFAULT_DECK)
    assert main([command, str(f)]) == 2
    line = _one_line(capsys)
    assert line.startswith(f"run error: {f}: is a file, not a run folder"), line
    assert main([command, str(tmp_path / "none")]) == 2
    assert _one_line(capsys) == f"run error: {tmp_path / 'none'}: no such folder"


# --------------------------------------------------------------------------------------------
# exit statuses: one table, every family through the CLI
# --------------------------------------------------------------------------------------------
def _raiser(ex):
    def f(*args, **kwargs):
        raise ex
    return f


def _families():
    from streamsim.engine import NumericalError
    from streamsim.io import OutputError
    from streamsim.memory import MemoryRefusal
    from streamsim.pipeline import DifferentDeck, FolderInUse, HealthRefusal, Interrupted
    from streamsim.scan import ScanSetupError, SchedulerError
    return [
        (DeckError("box.cells", "bad"), 2, "deck error: box.cells: bad"),
        (HealthRefusal("time.dt", "refused"), 2, "deck error: time.dt: refused"),
        (MemoryRefusal("box.cells", "too large"), 2, "deck error: box.cells: too large"),
        (DifferentDeck("title", "differs"), 2, "deck error: title: differs"),
        (ScanSetupError("--workers 9 x --threads 1 > 2 cores"), 2,
         "argument error: --workers 9 x --threads 1 > 2 cores"),
        (NumericalError("NaN at step 3"), 3, "numerical error: NaN at step 3"),
        (OutputError("cannot write x"), 4, "output error: cannot write x"),
        (FolderInUse("x is in use by pid 1"), 4, "output error: x is in use by pid 1"),
        (SchedulerError("no scheduler at tcp://h:1"), 4, "dask error: no scheduler at tcp://h:1"),
        (Interrupted("stopped at step 5 of 9"), 130, "interrupted: stopped at step 5 of 9"),
        (KeyboardInterrupt(), 130, "interrupted"),
        (MemoryError(), 4, "streamsim: out of memory: use fewer particles_per_cell or cells"),
        (RuntimeError("boom"), 1, "streamsim: internal error (RuntimeError: boom); please report "
         "it, and rerun with STREAMSIM_DEBUG=1 for the traceback"),
    ]


@pytest.mark.parametrize("i", range(13))
def test_exit_status_of_each_family_through_run(i, monkeypatch, tmp_path, capsys):
    """`streamsim run` whose pipeline raises each family: the one line and the status of
    README's "Exit statuses" table."""
    import streamsim.pipeline
    ex, status, line = _families()[i]
    monkeypatch.delenv("STREAMSIM_DEBUG", raising=False)
    monkeypatch.setattr(streamsim.pipeline, "run", _raiser(ex))
    rc = main(["run", "--quiet", "--out", str(tmp_path / "o")])
    assert rc == status
    got = _one_line(capsys)
    if status == 3:      # the run names where its checkpoint and diagnostics are
        assert got.startswith(line) and str(tmp_path / "o") in got
    else:
        assert got == line


def test_exit_statuses_of_the_other_commands(monkeypatch, tmp_path, capsys):
    import streamsim.scan
    import streamsim.theory
    # a scan file problem
    bad = tmp_path / "s.toml"
    bad.write_text('bse = 1\n')
    assert main(["scan", str(bad)]) == 2
    assert _one_line(capsys).startswith(f"scan error: {bad}: bse: unknown key")
    # a bad option of converge is an argument error
    assert main(["converge", "--levels", "1", "--out", str(tmp_path / "c")]) == 2
    assert _one_line(capsys).startswith("argument error: --levels")
    # the theory cannot be computed: theory error
    monkeypatch.setattr(streamsim.theory, "theory_for_deck", _raiser(ArithmeticError("no root")))
    assert main(["theory"]) == 2
    assert _one_line(capsys) == "theory error: no root"
    # an argument
    assert main(["theory", "--nk", "4"]) == 2
    assert _one_line(capsys) == "argument error: --nk must be at least 8 (got 4)"
    # nothing to resume is an output error
    assert main(["run", "--resume", str(tmp_path / "none")]) == 4
    assert _one_line(capsys).startswith("output error: nothing to resume")
    # a lost scheduler in a scan
    from streamsim.scan import SchedulerError
    good = tmp_path / "g.toml"
    good.write_text('[[axis]]\nkey = "box.cells"\nvalues = [32]\n')
    monkeypatch.setattr(streamsim.scan, "run_scan", _raiser(SchedulerError("lost")))
    assert main(["scan", str(good), "--out", str(tmp_path / "s")]) == 4
    assert _one_line(capsys) == "dask error: lost"
