"""Health findings are typed: a stable rule id and the species they concern are fields, never
parsed back from the message; several species' alike findings merge on the fields into the one
printed line; summary.json keeps the printed message and lists the species."""
from __future__ import annotations

import pytest

import streamsim
from conftest import pair_deck
from streamsim.deck import load_deck
from streamsim.health import RULES, Finding, check_deck, merge_findings
from streamsim.methods import METHODS
from streamsim.pipeline import HealthRefusal, _theory


def test_findings_carry_rule_id_and_species_and_merge_on_them():
    # cold beams on 16 cells: omega_p dx/|v_d| > 1 for both species (the cold-beam grid rule)
    deck = load_deck(pair_deck(cells=16, ppc=8, end=1.0))
    found = check_deck(deck, _theory(deck)[0])
    cold = [f for f in found if f.id == "cold_beam_grid_instability"]
    assert [f.species for f in cold] == [("electrons",), ("positrons",)]
    assert all(not f.message.startswith("species") for f in cold)
    assert all(f.id in RULES and f.rule == RULES[f.id] for f in found)
    lines = merge_findings(found)
    assert lines[0] == f"cold-beam grid instability: species electrons, positrons: {cold[0].message}"
    # the deck-wide refusal (2 cells per fastest wavelength) is a line of its own, species ()
    fast = next(f for f in found if f.id == "fastest_mode_resolution")
    assert fast.species == () and fast.level == "refusal"
    with pytest.raises(HealthRefusal) as info:
        streamsim.run(deck, write=False, analyze=False)
    assert str(info.value).endswith(f"{fast.message} (--force runs it anyway)")


def test_summary_health_entries_keep_the_message_and_list_the_species():
    r = streamsim.run(pair_deck(cells=16, ppc=8, end=1.0), write=False, analyze=False,
                      force=True)
    cold = [e for e in r.summary["health"] if e["rule"] == "cold-beam grid instability"]
    assert [e["species"] for e in cold] == [["electrons"], ["positrons"]]
    assert cold[0]["message"].startswith("species electrons: omega_p dx/|v_d| = ")
    assert r.warnings[0].startswith("cold-beam grid instability: species electrons, positrons: ")


def test_alike_messages_of_different_rules_or_levels_do_not_merge():
    a = Finding("warning", "noise floor", "k", "same text", species=("a",))
    b = Finding("warning", "cell crossing", "k", "same text", species=("b",))
    c = Finding("refusal", "noise floor", "k", "same text", species=("c",))
    assert merge_findings([a, b, c]) == ["noise floor: species a: same text",
                                         "cell crossing: species b: same text",
                                         "noise floor: species c: same text (run forced)"]


def test_the_vlasov_method_drops_the_particle_rules_by_id():
    found = [Finding("warning", "cell crossing", "time.dt", "x", species=("e",)),
             Finding("warning", "time-step accuracy", "time.dt", "y")]
    kept = METHODS["vlasov"].health(None, found)
    assert [f.id for f in kept] == ["time_step_accuracy"]
    assert METHODS["pic"].health(None, found) == found
