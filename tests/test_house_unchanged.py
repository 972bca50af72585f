"""Regression baseline for a refactor of the run pipeline (not a physics test).

``tests/data/house_baseline.json`` holds the summary.json numbers of four decks — the built-in
default deck, runs/warm-pair-beams-vlasov.toml, runs/drive-charge-starved.toml and
runs/drive-below-limit.toml — recorded from the code BEFORE the pipeline was split into a method
table, a run context, run-control handlers and a run-folder room (commit bbb7e99), with one
numba thread. This is the one allowed kind of self-comparison: it guards a refactor that must
leave every number unchanged. Each test reruns one deck at the deck's own size with one thread
(the runs are deterministic at a fixed thread count) and compares every number of the baseline:
the growth rates to 1e-4 relative, everything else to 1e-9 relative (strings, flags and
list lengths exactly). Keys the baseline lacks (added since) are not compared; a key the
baseline has must still be there (summary.json keys are a contract).

Intentional changes since the baseline are listed in ``SCALED_BY_MEASURED_GAMMA``: with
``analysis.bulk_gamma = "measured"`` the baseline code scaled only the coherence block's main
frequency by the measured bulk Lorentz factor Gamma; every coherence frequency now scales
(nu_c = Gamma c k_c / 2 pi for all of them), so those entries are compared with baseline x Gamma.

Intentional change since the baseline, the emission headline over the saturated window: the
coherence and clumps headlines now carry window values, and the single instants the baseline
holds moved to ``coherence.peak_snapshot`` / ``clumps.peak_snapshot``. Those blocks are compared
as {headline entries, overridden by peak_snapshot's} against the baseline, except the entries
that describe the headline itself (``REDEFINED``); added warnings and advice (the short-window
warning, the field-energy flag's advice) are compared by their baseline text as a prefix. And a
driven run's oscillation now compares with the root of the driven state, not of the initial
state (``theory_*`` of ``oscillation`` in the driven decks are not compared; the charge-starved
deck's ringing at 2.513 omega_p had the initial state's cold root 1.000 beside it, and now has
the driven state's 2.513).

Intentional change since the baseline, the clump-size histograms (``histogram`` of the clumps
block and of its snapshots): their bins now span the range of the widths found (sqrt(N) bins,
logarithmic over decades) instead of one cell from zero, so the edges and the counts per bin
differ; they are compared by the number of clumps binned (the same clumps, binned anew). And
the texts spell the plasma frequency ``omega_p`` and the contrast ``delta n/n`` everywhere (the
baseline's texts wrote ``w_p`` and ``dn/n`` in places): baseline texts are compared respelled.

Intentional change since the baseline, summary.json schema 2 (one name per quantity, units
last): the baseline's keys are renamed by ``RENAMED`` before the comparison, and
``coherence.frequency_cutoff_bound`` (which said what ``frequency_cutoff_lower_bound_hz`` being
set says) is compared through that key; ``theory.fastest.growth_time_efold_ns`` (the same number
as ``growth_time_ns``) and ``coherence.frequency_cutoff_ghz`` (``frequency_cutoff_hz`` in GHz) are
gone.

Do not re-record the baseline to make this test pass: it must come from the code before the
change it guards.
"""
from __future__ import annotations

import json
import math
import re
from pathlib import Path

import pytest

from streamsim import pipeline

BASELINE = Path(__file__).parent / "data" / "house_baseline.json"
ROOT = Path(__file__).resolve().parent.parent
DECKS = {"default": None,
         "warm-pair-beams-vlasov": ROOT / "runs" / "warm-pair-beams-vlasov.toml",
         "drive-charge-starved": ROOT / "runs" / "drive-charge-starved.toml",
         "drive-below-limit": ROOT / "runs" / "drive-below-limit.toml"}
#: what changes from run to run of the same deck (timing, version)
VOLATILE = {"wall_s", "particle_steps_per_s", "streamsim_version", "cell_steps_per_s"}
#: top-level blocks compared at 1e-4 relative
GROWTH = {"growth", "modes", "field_energy_growth"}
#: coherence entries that the baseline code left unscaled by the measured Gamma (see docstring)
SCALED_BY_MEASURED_GAMMA = (
    (("drive-below-limit", "coherence", "frequency_cutoff_err_hz"), ("coherence", "bulk_gamma")),
    (("drive-below-limit", "coherence", "frequency_cutoff_lower_bound_hz"),
     ("coherence", "bulk_gamma")),
    *((("drive-below-limit", "coherence", "by_species", s, "frequency_cutoff_err_hz"),
       ("coherence", "by_species", s, "bulk_gamma")) for s in ("electrons", "positrons")),
)


#: summary.json schema 1 -> 2: (block, old key, new key); block "modes" is every row of the list,
#: "coherence.by_species" every species' entry
RENAMED = (("growth", "method", "fit"), ("field_energy_growth", "method", "fit"),
           ("modes", "method", "fit"),
           ("momentum", "drift_max", "error_max"),
           ("momentum", "drift_max_relative", "error_max_relative"),
           ("coherence", "frequency_cutoff_hz_err", "frequency_cutoff_err_hz"),
           ("coherence.by_species", "frequency_cutoff_hz_err", "frequency_cutoff_err_hz"),
           ("coherence", "frequency_cutoff_hz_lower_bound", "frequency_cutoff_lower_bound_hz"),
           ("contrast", "t_unity_ns_for_level", "t_unity_for_level_ns"),
           ("drive", "e_parallel_max", "e0_max"),
           ("drive", "e_parallel_max_statv_cm", "e0_max_statv_cm"),
           ("drive.units", "e_parallel_max", "e0_max"),
           ("drive.units", "e_parallel_max_statv_cm", "e0_max_statv_cm"))


def renamed(baseline: dict) -> dict:
    """The baseline with the key names of summary.json schema 2 (module docstring)."""
    def entries(block):
        head, *rest = block.split(".")
        d = baseline.get(head)
        if head == "modes":
            return [r for r in d or [] if isinstance(r, dict)]
        for k in rest:
            d = d.get(k) if isinstance(d, dict) else None
        if rest == ["by_species"]:
            return [v for v in (d or {}).values() if isinstance(v, dict)]
        return [d] if isinstance(d, dict) else []
    for block, old, new in RENAMED:
        for d in entries(block):
            if old in d:
                d[new] = d.pop(old)
    fastest = (baseline.get("theory") or {}).get("fastest")
    if isinstance(fastest, dict):   # removed: the same number as growth_time_ns
        fastest.pop("growth_time_efold_ns", None)
    co = baseline.get("coherence")
    if isinstance(co, dict):        # removed: frequency_cutoff_hz in GHz
        co.pop("frequency_cutoff_ghz", None)
    if isinstance(co, dict) and "frequency_cutoff_bound" in co:
        bound = co.pop("frequency_cutoff_bound")
        co["_lower_bound_given"] = bound == "lower"
    return baseline


#: blocks whose baseline (single-instant) entries now live under ``peak_snapshot``
MOVED_TO_PEAK_SNAPSHOT = ("coherence", "clumps")
#: entries of those blocks that describe the (window) headline itself, not the instant
REDEFINED = {"definition", "error_estimator", "snapshot", "headline"}
#: warnings added since the baseline (compared without them)
ADDED_WARNINGS = ("the saturated window ",)


def rebinned(d):
    """``d`` with every clump-size ``histogram`` replaced by its number of clumps binned (module
    docstring: the bins changed on purpose, the clumps did not)."""
    if isinstance(d, dict):
        return {k: ({"clumps_binned": int(sum(v.get("counts") or []))}
                    if k == "histogram" and isinstance(v, dict) else rebinned(v))
                for k, v in d.items()}
    if isinstance(d, list):
        return [rebinned(v) for v in d]
    return d


def as_baseline(name: str, got: dict) -> dict:
    """The new summary in the baseline's shape (module docstring: the intentional change)."""
    out = dict(got)
    for block in MOVED_TO_PEAK_SNAPSHOT:
        b = got.get(block)
        if isinstance(b, dict) and isinstance(b.get("peak_snapshot"), dict):
            out[block] = {k: v for k, v in {**b, **b["peak_snapshot"]}.items()
                          if k not in REDEFINED}
    co = out.get("coherence")
    if isinstance(co, dict):
        out["coherence"] = {**co, "_lower_bound_given":
                            co.get("frequency_cutoff_lower_bound_hz") is not None}
    if isinstance(got.get("warnings"), list):
        out["warnings"] = [w for w in got["warnings"] if not w.startswith(ADDED_WARNINGS)]
    return out


def trimmed(summary: dict) -> dict:
    """The summary without volatile entries; of the (large) theory block only ``fastest``."""
    out = {k: v for k, v in summary.items() if k not in VOLATILE}
    if isinstance(out.get("theory"), dict):
        out["theory"] = {"fastest": out["theory"].get("fastest")}
    return json.loads(json.dumps(out, default=str))


def run_deck(name: str, folder: Path) -> dict:
    res = pipeline.run(DECKS[name], out=folder, threads=1, figures=False, force=True)
    return trimmed(res.summary)


def respelled(text: str) -> str:
    """A baseline text in the one spelling of today (module docstring)."""
    text = re.sub(r"(?<![\\A-Za-z])w_p(?![a-z])", "omega_p", text)
    return re.sub(r"(?<![\\A-Za-z])dn/n", "delta n/n", text)


def compare(expected, got, path: str, rtol: float, errors: list) -> None:
    if isinstance(expected, str):
        expected = respelled(expected)
    if isinstance(expected, dict):
        if not isinstance(got, dict):
            errors.append(f"{path}: expected a dict, got {got!r:.80}")
            return
        for k, v in expected.items():
            if k in VOLATILE:
                continue
            if k not in got:
                errors.append(f"{path}.{k}: missing")
                continue
            compare(v, got[k], f"{path}.{k}", rtol, errors)
    elif isinstance(expected, list):
        if not isinstance(got, list) or len(got) != len(expected):
            errors.append(f"{path}: expected a list of {len(expected)}, got {got!r:.80}")
            return
        for i, (a, b) in enumerate(zip(expected, got)):
            compare(a, b, f"{path}[{i}]", rtol, errors)
    elif isinstance(expected, str) and path.endswith(".flag"):
        if not (isinstance(got, str) and got.startswith(expected)):   # advice appended since
            errors.append(f"{path}: expected {expected!r:.120}..., got {got!r:.120}")
    elif isinstance(expected, bool) or expected is None or isinstance(expected, str):
        if got != expected:
            errors.append(f"{path}: expected {expected!r:.120}, got {got!r:.120}")
    elif isinstance(expected, (int, float)):
        if isinstance(got, bool) or not isinstance(got, (int, float)):
            errors.append(f"{path}: expected {expected!r}, got {got!r:.80}")
        elif not math.isclose(got, expected, rel_tol=rtol, abs_tol=0.0):
            errors.append(f"{path}: expected {expected!r}, got {got!r} (rtol {rtol:g})")
    else:
        errors.append(f"{path}: unexpected type {type(expected)}")


def get(d: dict, path: tuple):
    for k in path:
        d = d[k]
    return d


def put(d: dict, path: tuple, value) -> None:
    for k in path[:-1]:
        d = d[k]
    d[path[-1]] = value


@pytest.mark.parametrize("name", list(DECKS))
def test_numbers_unchanged_by_the_refactor(name, tmp_path):
    baseline = rebinned(renamed(json.loads(BASELINE.read_text(encoding="utf-8"))[name]))
    got = rebinned(as_baseline(name, run_deck(name, tmp_path / name)))
    for block in MOVED_TO_PEAK_SNAPSHOT:
        for k in REDEFINED:
            baseline.get(block, {}).pop(k, None)
    if name.startswith("drive-"):
        for row in baseline.get("oscillation") or []:
            for k in [k for k in row if k.startswith("theory_")]:
                row.pop(k)
    for path, gamma_path in SCALED_BY_MEASURED_GAMMA:
        if path[0] == name:
            old = get(baseline, path[1:])
            if old is not None:
                put(baseline, path[1:], old * get(got, gamma_path))
    errors: list[str] = []
    for key, value in baseline.items():
        if key in VOLATILE:
            continue
        if key not in got:
            errors.append(f"{key}: missing")
            continue
        compare(value, got[key], key, 1e-4 if key in GROWTH else 1e-9, errors)
    assert not errors, f"{len(errors)} differences:\n" + "\n".join(errors[:40])


def _record(path: Path = BASELINE) -> None:   # pragma: no cover - run once, before a refactor
    import tempfile
    out = {}
    with tempfile.TemporaryDirectory() as tmp:
        for name in DECKS:
            out[name] = run_deck(name, Path(tmp) / name)
    path.write_text(json.dumps(out, indent=0, sort_keys=True) + "\n", encoding="utf-8")


if __name__ == "__main__":   # pragma: no cover
    _record()
