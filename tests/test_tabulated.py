"""Species from a tabulated f(u): the table interpolant, its linear theory, the Penrose verdict and
the loading, each checked against something outside the table code."""
import math

import numpy as np
import pytest
import tomllib

from scipy import integrate, optimize

from streamsim import loading
from streamsim.deck import Species
from streamsim.distribution_table import MIN_ROWS, TableError, check_rows, table_from_arrays
from streamsim.theory import growth_curve, waterbag_roots
from streamsim.theory.formulas import juttner_distribution, waterbag_edges
from streamsim.theory.tabulated import penrose_verdict


def _species(name, charge, density, distribution, drift_u=0.0, theta=0.0, spread_u=0.0,
             table=None):
    return Species(name=name, charge=charge, mass=1.0, density=density, drift_u=drift_u,
                   theta=theta, distribution=distribution, spread_u=spread_u,
                   particles_per_cell=16, loading="quiet", table=table)


def juttner(name, charge, drift_u, theta, density=0.5):
    return _species(name, charge, density, "juttner", drift_u, theta)


def waterbag(name, charge, drift_u, spread, density=0.5):
    return _species(name, charge, density, "waterbag", drift_u, spread_u=spread)


def cold(name, charge, drift_u, density=0.5):
    return _species(name, charge, density, "cold", drift_u)


def tabled(name, charge, u, f, density=0.5):
    t = table_from_arrays(u, f)
    return _species(name, charge, density, "table", t.moments()[0], table=t)


def juttner_rows(drift_u, theta, rows):
    """A drifting Juttner written as a table: rows uniform in rapidity over the 12-sigma range."""
    lo, hi = loading.juttner_u_range(drift_u, theta, 12.0)
    u = np.sinh(np.linspace(math.asinh(lo), math.asinh(hi), rows))
    return u, juttner_distribution(u, drift_u, theta)


# -- the interpolant ------------------------------------------------------------------------
def test_table_is_normalised_and_its_cdf_is_exact():
    # f = 1 on [-1, 1] (linear in v of a constant is that constant): CDF(u) = (u + 1)/2 exactly
    u = np.linspace(-1.0, 1.0, 11)
    t = table_from_arrays(u, np.full(u.size, 7.0))
    assert t.f == pytest.approx(np.full(u.size, 0.5), rel=1e-14)
    q = np.array([0.0, 0.1, 0.37, 0.5, 0.99, 1.0])
    assert t.cdf_at(2 * q - 1) == pytest.approx(q, abs=1e-14)
    assert t.inverse_cdf(q) == pytest.approx(2 * q - 1, abs=1e-12)
    # f linear in v: Int_{u0}^{u1} v du = gamma(u1) - gamma(u0) (d gamma/du = v)
    u = np.linspace(0.0, 3.0, 9)
    t = table_from_arrays(u, u / np.sqrt(1 + u * u))
    assert t.cdf_at(np.array([1.7]))[0] == pytest.approx(
        (math.sqrt(1 + 1.7**2) - 1) / (math.sqrt(10) - 1), rel=1e-13)


@pytest.mark.parametrize("u,f,words", [
    (np.arange(MIN_ROWS - 1.0), np.ones(MIN_ROWS - 1), f"needs at least {MIN_ROWS}"),
    (np.arange(10.0), np.r_[np.ones(4), np.nan, np.ones(5)], "row 5: f = nan is not finite"),
    (np.arange(10.0), np.r_[np.ones(4), -1.0, np.ones(5)], "row 5: f = -1 is negative"),
    (np.r_[np.arange(5.0), 3.0, np.arange(6.0, 10.0)], np.ones(10), "row 6: u = 3 does not exceed"),
    (np.arange(10.0), np.zeros(10), "f is zero on every row"),
])
def test_bad_rows_are_refused_with_the_row(u, f, words):
    with pytest.raises(TableError, match=words.replace("(", r"\(")):
        check_rows(u, f, "mine.csv")


# -- theory against the built-in models -----------------------------------------------------
def test_juttner_table_reproduces_the_juttner_model():
    # reference: the built-in Juttner model (checked against independent roots in test_theory);
    # linear interpolation between 2e4 rows is second order: ~1e-6 relative expected
    J = [juttner("e", -1, 1.0, 0.05), juttner("p", 1, -1.0, 0.05)]
    T = [tabled("e", -1, *juttner_rows(1.0, 0.05, 20000)),
         tabled("p", 1, *juttner_rows(-1.0, 0.05, 20000))]
    k = np.linspace(0.05, 1.2, 24)
    gj, wj = growth_curve(J, k)
    gt, wt = growth_curve(T, k, model="table")
    grow = gj > 1e-4
    assert grow.sum() > 10
    assert gt[grow] == pytest.approx(gj[grow], rel=2e-6)
    assert np.all(gt[gj == 0.0] == 0.0)


def test_waterbag_table_reproduces_the_algebraic_dispersion_relation():
    # a waterbag is flat in lab u between its boosted edges, so its table (f = const on rows
    # spanning the edges) is the waterbag itself; reference: the roots of the algebraic
    # waterbag dispersion relation eps = 1 - Sum c_s/((omega - k v1)(omega - k v2)) (companion
    # matrix), e.g. Berk, Nielsen & Roberts 1970, Phys. Fluids 13, 980 (waterbag model)
    W = [waterbag("e", -1, 0.6, 0.2), waterbag("p", 1, -0.6, 0.2)]
    T = []
    for s in W:
        u1, u2 = waterbag_edges(s.drift_u, s.spread_u)
        u = np.linspace(u1, u2, 16)
        T.append(tabled(s.name, s.charge, u, np.ones(u.size)))
    k = np.linspace(0.05, 2.0, 30)
    roots = waterbag_roots(k, W)
    g_ref = np.max(np.abs(roots.imag), axis=1)
    g_ref[g_ref < 1e-7] = 0.0
    gt, _ = growth_curve(T, k, model="table")
    assert g_ref.max() > 0.1
    assert gt == pytest.approx(g_ref, rel=1e-9, abs=1e-9)


# -- Penrose verdicts -------------------------------------------------------------------------
def test_single_maxwellian_table_is_stable():
    # Penrose 1960: a single-humped distribution is stable
    u = np.linspace(-0.3, 0.3, 601)
    v = penrose_verdict([tabled("e", -1, u, np.exp(-u * u / (2 * 0.03**2)), 1.0)])
    assert v.stable


def test_two_separated_beams_are_unstable_between_them():
    T = [tabled("e", -1, *juttner_rows(0.6, 0.005, 4001)),
         tabled("p", 1, *juttner_rows(-0.6, 0.005, 4001))]
    v = penrose_verdict(T)
    assert not v.stable
    vb = 0.6 / math.sqrt(1 + 0.36)
    assert v.band[0] == pytest.approx(-vb, rel=1e-2) and v.band[1] == pytest.approx(vb, rel=1e-2)
    # the built-in Juttner species get the same verdict
    assert not penrose_verdict([juttner("e", -1, 0.6, 0.005), juttner("p", 1, -0.6, 0.005)]).stable


def _double_maxwellian_threshold():
    """Half-separation a (in thermal speeds) at which two equal Maxwellians at +-a turn unstable:
    the Penrose integral at the minimum v = 0, P(0) = 2 Int_0^inf (G(v) - G(0))/v^2 dv, computed
    by scipy.integrate.quad on the analytic G (Penrose 1960) and solved for P(0) = 0."""
    def p0(a):
        G = lambda v: math.exp(-(v - a) ** 2 / 2) + math.exp(-(v + a) ** 2 / 2)
        g2 = (a * a - 1) * 2 * math.exp(-a * a / 2)          # G''(0)
        f = lambda v: (G(v) - G(0)) / v**2 if v > 1e-4 else 0.5 * g2
        return integrate.quad(f, 0, 1, limit=200)[0] + integrate.quad(f, 1, 40, limit=200)[0]
    return optimize.brentq(p0, 1.01, 2.0)


def test_double_maxwellian_threshold_matches_the_penrose_integral():
    a_c = _double_maxwellian_threshold()
    vt = 0.01                          # c: relativistic corrections ~ vt^2
    u = np.linspace(-0.2, 0.2, 8001)
    for a, stable in ((0.98 * a_c, True), (1.02 * a_c, False)):
        f = np.exp(-(u - a * vt) ** 2 / (2 * vt * vt)) + np.exp(-(u + a * vt) ** 2 / (2 * vt * vt))
        assert penrose_verdict([tabled("e", -1, u, f, 1.0)]).stable is stable, a / a_c


def test_bump_on_tail_growth_sits_in_the_verdicts_band():
    # a Maxwellian core and a 5% bump: Penrose unstable; the fastest growing root found by the
    # table model must have its phase velocity inside the band the verdict names
    u = np.linspace(-0.3, 0.6, 9001)
    f = np.exp(-u * u / (2 * 0.05**2)) + 0.05 / 0.3 * np.exp(-(u - 0.35) ** 2 / (2 * 0.015**2))
    s = tabled("e", -1, u, f, 1.0)
    v = penrose_verdict([s])
    assert not v.stable
    k = np.linspace(0.5, 6.0, 120)
    g, w = growth_curve([s], k, model="table")
    i = int(np.argmax(g))
    assert g[i] > 1e-4
    assert v.band[0] < w[i] / k[i] < v.band[1]


def test_cold_rules():
    assert not penrose_verdict([cold("e", -1, 0.5), cold("p", 1, -0.5)]).stable
    assert penrose_verdict([cold("e", -1, 0.5, 1.0)]).stable
    # a cold beam on the slope of a warm plasma: beam-plasma instability
    assert not penrose_verdict([juttner("e", -1, 0.0, 0.01), cold("b", -1, 0.05, 0.01)]).stable


# -- loading ----------------------------------------------------------------------------------
def test_table_loading_matches_the_juttner_loading():
    # reference: the built-in Juttner loading (its moments are checked in test_loading)
    u, f = juttner_rows(1.0, 0.05, 10000)
    t = tabled("e", -1, u, f)
    j = juttner("e", -1, 1.0, 0.05)
    rng = np.random.default_rng(3)
    a = loading.momenta(j, 1 << 18, True, rng)
    b = loading.momenta(t, 1 << 18, True, rng)
    assert b.mean() == pytest.approx(a.mean(), rel=2e-6)
    assert b.std() == pytest.approx(a.std(), rel=2e-5)
    c = loading.momenta(t, 1 << 18, False, np.random.default_rng(5))
    assert c.mean() == pytest.approx(a.mean(), abs=4 * a.std() / math.sqrt(c.size))


# -- damped roots by continuation ---------------------------------------------------------------
@pytest.mark.parametrize("k_ld,published", [(0.5, complex(1.4157, -0.1534)),
                                            (0.3, complex(1.1598, -0.0126))])
def test_maxwellian_table_gives_the_published_landau_root(k_ld, published):
    # the widely tabulated Landau roots of a Maxwellian (4 decimals, quoted from memory; the
    # validation re-derives them with scipy.special.wofz); v_th = 0.005 c keeps relativistic
    # corrections ~ v_th^2 below those digits
    from streamsim.theory import table_damped_root
    vt = 0.005
    u = np.linspace(-12 * vt, 12 * vt, 2001)
    s = tabled("e", -1, u, np.exp(-u * u / (2 * vt * vt)), 1.0)
    w, fit_err = table_damped_root(k_ld / vt, [s], published.real - 0.1j)
    assert fit_err < 1e-10
    assert w.real == pytest.approx(published.real, abs=2e-4)
    assert w.imag == pytest.approx(published.imag, abs=2e-4)


# -- the deck: bad tables, one line each, exit 2, no run folder --------------------------------
GOOD = [(u, math.exp(-u * u / 0.02)) for u in np.linspace(-0.5, 0.5, 21)]
GOOD_ROWS = "".join(f"{u:.6g},{f:.6g}\n" for u, f in GOOD)


def csv_with(i: int, line: str, head: str = "u,f\n") -> str:
    """The good table with data row i replaced by ``line`` (file line = i + 1 + head lines)."""
    rows = [f"{u:.6g},{f:.6g}" for u, f in GOOD]
    rows[i] = line
    return head + "\n".join(rows) + "\n"


PAIR_DECK = """title = "table deck"
[box]
length = 10.0
cells = 32
[time]
end = 1.0
[[species]]
name = "electrons"
charge = -1.0
density = 0.5
distribution = "table"
table = "e.csv"
particles_per_cell = 4
{extra}
[[species]]
name = "positrons"
charge = 1.0
density = 0.5
particles_per_cell = 4
"""


def _run_table_deck(tmp_path, capsys, csv: str | None, extra: str = ""):
    from streamsim.cli import main
    (tmp_path / "d").mkdir()
    if csv is not None:
        (tmp_path / "d" / "e.csv").write_text(csv)
    deck = tmp_path / "d" / "deck.toml"
    deck.write_text(PAIR_DECK.format(extra=extra))
    out = tmp_path / "out"
    rc = main(["run", str(deck), "--quiet", "--out", str(out)])
    return rc, capsys.readouterr().err.strip().splitlines(), out


@pytest.mark.parametrize("csv,extra,words", [
    (None, "", "e.csv: cannot read the table"),
    ("x,y\n1,2\n", "", "e.csv, row 1: the header must be 'u,f'"),
    ("u,f\n" + "".join(f"{i},1\n" for i in range(MIN_ROWS - 1)), "",
     f"rows; a table needs at least {MIN_ROWS}"),
    (csv_with(4, "-0.3,inf", "# a comment line\nu,f\n"), "", "e.csv, row 7: f = inf is not finite"),
    (csv_with(4, "-0.3,-0.5"), "", "e.csv, row 6: f = -0.5 is negative"),
    (csv_with(4, "-0.36,0.01"), "", "e.csv, row 6: u = -0.36 does not exceed"),
    (csv_with(4, "-0.3;0.01"), "", "e.csv, row 6: expected two values"),
    ("u,f\n" + "".join(f"{i},0\n" for i in range(10)), "", "e.csv: f is zero on every row"),
    ("u,f\n" + GOOD_ROWS, "drift_u = 0.3", "a table species takes its drift and spread from the table"),
    ("u,f\n" + GOOD_ROWS, "temperature_kev = 5.0", "remove temperature_kev"),
])
def test_bad_table_gives_one_line_exit_2_no_folder(tmp_path, capsys, csv, extra, words):
    rc, lines, out = _run_table_deck(tmp_path, capsys, csv, extra)
    assert rc == 2
    assert len(lines) == 1, lines
    assert lines[0].startswith("deck error: species.electrons."), lines[0]
    assert words in lines[0], lines[0]
    assert not out.exists()


def test_table_deck_round_trips_and_differs_by_table(tmp_path):
    from streamsim.deck import load_deck
    (tmp_path / "e.csv").write_text("# a comment\nu,f\n" + GOOD_ROWS)
    deck_file = tmp_path / "deck.toml"
    deck_file.write_text(PAIR_DECK.format(extra=""))
    a = load_deck(deck_file)
    assert a.species[0].distribution == "table"
    # the resolved deck carries the rows and the file's checksum: it loads back without the file
    (tmp_path / "e.csv").unlink()
    b = load_deck(tomllib.loads(a.to_toml()))
    assert b == a and b.to_dict() == a.to_dict()
    import hashlib
    assert a.species[0].table.sha256 == hashlib.sha256(
        ("# a comment\nu,f\n" + GOOD_ROWS).encode()).hexdigest()
    # another table is another deck
    (tmp_path / "e.csv").write_text(csv_with(10, "0,2"))
    assert load_deck(deck_file) != a


def _inline_deck(tables, method="pic"):
    from streamsim.deck import load_deck
    sps = [{"name": n, "charge": q, "density": 0.5, "distribution": "table", "particles_per_cell": 4,
            "table": {"u": [float(x) for x in u], "f": [float(x) for x in f]}}
           for n, q, (u, f) in zip(("electrons", "positrons"), (-1.0, 1.0), tables)]
    return load_deck({"title": "t", "box": {"length": 20.0, "cells": 64}, "time": {"end": 1.0},
                      "species": sps, "method": method})


def test_stable_table_deck_says_so_without_a_root_search():
    # Penrose 1960: a single-humped G is stable; both species share one Maxwellian at rest
    from streamsim import theory
    u = np.linspace(-0.3, 0.3, 301)
    f = np.exp(-u * u / (2 * 0.05**2))
    d = theory.theory_for_deck(_inline_deck([(u, f), (u, f)])).to_dict()
    assert d["model"] == "table" and d["stability"]["stable"]
    assert d["fastest"] is None and not d["unstable_bands"]
    assert any("no growing root searched for" in n for n in d["notes"])


def test_vlasov_start_from_a_table_matches_the_juttner_profile():
    # reference: the built-in Juttner profile of the Vlasov start (cell-centre values)
    from streamsim.vlasov.grid import MomentumGrid, momentum_profile
    u, f = juttner_rows(0.5, 0.02, 20001)
    t = tabled("e", -1, u, f)
    g = MomentumGrid(-1.0, 2.0, 512, True)
    a = momentum_profile(t, g)
    b = momentum_profile(juttner("e", -1, 0.5, 0.02), g)
    assert a.sum() * g.du == pytest.approx(1.0, abs=1e-12)
    # cell average vs cell-centre value: differ by du^2 f''/24, ~1e-3 of the peak here
    assert np.max(np.abs(a - b)) < 3e-3 * b.max()


def test_vlasov_grid_spans_the_table_and_warns_when_the_core_is_unresolved():
    from streamsim import health
    from streamsim.vlasov.grid import momentum_grid
    u = np.linspace(-0.05, 30.0, 4000)
    f = np.exp(-(u - 0.5) ** 2 / (2 * 0.02**2)) + 1e-3 / (1 + u * u)
    d = _inline_deck([(u, f), (-u[::-1], f[::-1])], method="vlasov")
    g = momentum_grid(d, d.species[0])
    assert g.u_min <= -0.05 and g.u_max >= 30.0
    found = [x for x in health.check_deck(d) if x.rule == "table support"]
    assert found and "vlasov.momentum_cells >=" in found[0].message
