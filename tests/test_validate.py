"""`streamsim validate`: the quick validation passes, and a broken kernel or field solve makes it
fail (so the suite can fail). The references inside the validation are checked here against
values from outside the project, each named beside its check."""
from __future__ import annotations

import csv
import math

import numpy as np
import pytest

from streamsim.validation import PROBLEM_KEYS, run_validation
from streamsim.validation import references as ref
from streamsim.validation.checks import Check


@pytest.fixture(scope="module")
def quick(tmp_path_factory):
    """The whole quick validation, once for this module (< 3 min on 2 cores)."""
    v = run_validation("quick")
    folder = tmp_path_factory.mktemp("validation")
    v.write_report(folder)
    return v, folder


def test_quick_validation_passes(quick):
    v, _ = quick
    failed = [f"{c.problem}: {c.quantity} = {c.measured_text()} vs {c.reference_text()} "
              f"({c.tolerance_text()})" for c in v.failed]
    assert not failed, "failed checks:\n" + "\n".join(failed)
    assert {p.key for p in v.problems} == set(PROBLEM_KEYS)
    # pinned (README, Validation: "51/51 checks pass" for --quick; 46 before the tabulated
    # problem added 5): a check that disappears must change this number on purpose
    assert len(v.checks) == 51


def test_report_files_and_table(quick):
    v, folder = quick
    for name in ("report.md", "results.csv", "results.json"):
        assert (folder / name).is_file()
    for key in PROBLEM_KEYS:
        assert (folder / f"{key}.png").stat().st_size > 1000
    with open(folder / "results.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == len(v.checks)
    for col in ("problem", "quantity", "measured", "error", "reference", "source", "tolerance",
                "pass"):
        assert col in rows[0]
    text = (folder / "report.md").read_text()
    for p in v.problems:
        assert p.title in text and p.source in text
    assert "leaves out" in text


def _only_oscillation(tmp_path):
    from streamsim.cli import main
    return main(["validate", "--quick", "--only", "plasma_oscillation", "--report",
                 str(tmp_path)])


def test_cli_exit_status_and_report(tmp_path, capsys):
    assert _only_oscillation(tmp_path) == 0
    out = capsys.readouterr().out
    assert "plasma oscillation" in out and "pass" in out
    assert (tmp_path / "report.md").is_file() and (tmp_path / "results.csv").is_file()


def test_reversed_force_in_the_push_fails_validation(monkeypatch, tmp_path):
    """A sign error in the push (q/m dt flipped) turns the restoring force into a repelling one:
    the plasma oscillation check must fail and the CLI must exit 1."""
    import streamsim.kernels as kernels
    good = kernels.push_deposit

    def broken(x, u, efield, qm_dt, *rest):
        return good(x, u, efield, -qm_dt, *rest)
    monkeypatch.setattr(kernels, "push_deposit", broken)
    v = run_validation("quick", problems=["plasma_oscillation"])
    assert not v.passed
    assert _only_oscillation(tmp_path) == 1


def test_wrong_field_factor_fails_validation(monkeypatch):
    """A field solve 10 % too strong raises omega by ~5 % (omega^2 ∝ the force): fails."""
    import streamsim.fields as fields
    good = fields.solve
    monkeypatch.setattr(fields, "solve", lambda rho, green: 1.1 * good(rho, green))
    v = run_validation("quick", problems=["plasma_oscillation"])
    assert not v.passed
    # and it fails for the physical reason: omega = sqrt(1.1) omega_p, as leapfrog gives it
    (check,) = v.checks
    assert check.measured == pytest.approx(ref.leapfrog_frequency(math.sqrt(1.1), 0.05), abs=1e-3)


# --------------------------------------------------------------------------------------------
# The validation's own references against outside values
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("kl,published", [(0.3, 1.1598 - 0.0126j), (0.4, 1.2851 - 0.0661j),
                                          (0.5, 1.4157 - 0.1534j)])
def test_landau_reference_roots(kl, published):
    """Widely tabulated Landau roots of the Maxwellian plasma (4 decimals, quoted from memory),
    against the root of 1 + [1 + zeta Z(zeta)]/(k lambda_D)^2 with Z from scipy.special.wofz
    (Fried & Conte 1961); the validation's table holds the same values."""
    w = ref.maxwellian_root(kl)
    assert abs(w.real - published.real) < 1e-4 and abs(w.imag - published.imag) < 1e-4
    assert ref.PUBLISHED_LANDAU_ROOTS[kl] == published


def test_cold_symmetric_maximum():
    """Max growth omega_b/2 at k v0 = (sqrt3/2) omega_b, band edge k v0 = sqrt2 omega_b
    (Birdsall & Langdon 1991; from memory)."""
    wb, v0 = 0.3, 0.2
    assert ref.cold_symmetric_growth(math.sqrt(3) / 2 * wb / v0, v0, wb) == pytest.approx(wb / 2,
                                                                                        rel=1e-12)
    assert ref.cold_symmetric_growth(1.001 * math.sqrt(2) * wb / v0, v0, wb) == 0.0


def test_weak_beam_root_tends_to_the_law():
    """As n_b/n_p -> 0 the exact cold root tends to (sqrt3/2^(4/3)) (n_b/n_p)^(1/3)/gamma_b
    (Krall & Trivelpiece 1973, sec. 9.4; from memory); the relative gap shrinks like (n_b/n_p)^(1/3)."""
    gaps = [abs(ref.weak_beam_root(1 / 0.5, r, 0.5).imag / ref.weak_beam_law(r, 0.5) - 1)
            for r in (1e-3, 1e-5, 1e-7)]
    assert gaps[0] > gaps[1] > gaps[2] and gaps[2] < 0.005


def test_juttner_reference_cold_limit():
    """Small theta: the Juttner quadrature root tends to the cold root (the theta -> 0 limit of the kinetic eps: f -> delta(u - u0))."""
    u0 = 1.0
    beta = u0 / math.sqrt(1 + u0 * u0)
    wb = math.sqrt(0.5 / (1 + u0 * u0) ** 1.5)
    k = math.sqrt(3) / 2 * wb / beta
    g = ref.symmetric_juttner_growth(k, 0.5, u0, 1e-5, upper=0.5)
    assert g == pytest.approx(wb / 2, rel=2e-3)


def test_cic_noise_formula_against_sampling():
    """The CIC shot-noise formula against a direct numpy sampling (seeded), independent of
    the engine: 200 cells, 50 particles per cell, 400 draws."""
    rng = np.random.default_rng(7)
    cells, ppc = 200, 50
    vals = []
    for _ in range(400):
        xg = rng.random(cells * ppc) * cells
        i = np.floor(xg).astype(int)
        f = xg - i
        n = np.bincount(i % cells, 1 - f, cells) + np.bincount((i + 1) % cells, f, cells)
        vals.append(np.mean((n / ppc - 1) ** 2))
    assert math.sqrt(np.mean(vals)) == pytest.approx(ref.cic_density_noise(ppc, cells), rel=0.01)


def test_leapfrog_frequency_expansion():
    """(2/dt) asin(dt/2) = 1 + dt^2/24 + 3 dt^4/640 + ... (Taylor series of arcsin)."""
    dt = 0.1
    assert ref.leapfrog_frequency(1.0, dt) == pytest.approx(1 + dt**2 / 24 + 3 * dt**4 / 640,
                                                            abs=1e-9)


def test_check_logic():
    """Pass/fail from hand-made numbers: relative, absolute and bound kinds, and no result."""
    assert Check("p", "q", 1.02, None, 1.0, "s", 0.03).passed
    assert not Check("p", "q", 1.04, None, 1.0, "s", 0.03).passed
    assert not Check("p", "q", -1.0, None, 1.0, "s", 0.03).passed
    assert Check("p", "q", 0.5, None, 0.45, "s", 0.1, "absolute").passed
    assert not Check("p", "q", 2e-3, None, 1e-3, "s", 0.0, "upper").passed
    assert not Check("p", "q", None, None, 1.0, "s", 0.5).passed
    assert not Check("p", "q", float("nan"), None, 1.0, "s", 0.5).passed
