"""A species' momentum distribution given as a table f(u): reading, checking, interpolation,
moments, cumulative distribution and its inverse.

The table lists lab-frame momenta u = gamma*beta (strictly increasing) and f >= 0 in any
normalisation.  Between two rows f is interpolated **linearly in the velocity v = u/sqrt(1+u^2)**
(not in u), and f = 0 outside the rows (so a table whose first or last f is not zero cuts a tail
there).  Why linear, and why in v:

- linear interpolation keeps f >= 0 and adds no extremum between rows (no overshoot, unlike a
  spline), so the table's own minima and maxima are the interpolant's: the stability verdict
  (Penrose 1960) sees exactly the humps the user tabulated;
- in v, the effective distribution G(v) = sum_s omega_ps^2 f_s(u(v)) of the linear theory is then
  piecewise linear, whose dielectric function is a finite sum of logarithms (exact, no quadrature
  error on top of the interpolation; :mod:`streamsim.theory.tabulated`);
- in u, f linear in v integrates in closed form too: Int (a + b v) du = a u + b gamma (since
  dv = du/gamma^3 and d gamma/du = v), so the cumulative distribution used for loading is exact
  and the loading, the theory and the Vlasov start all see one and the same f.

Normalised units: u = gamma*beta, v in c.  The table is normalised here to Int f du = 1 (the
species' ``density`` stays its lab-frame density).
"""
from __future__ import annotations

import hashlib
import math
import os
from dataclasses import dataclass, field

import numpy as np

__all__ = ["MIN_ROWS", "TableError", "DistributionTable", "read_table_csv", "table_from_arrays",
           "parse_table_text"]

#: fewest rows a table may have.  A hump needs at least its rise, top and fall resolved by a few
#: rows each, and the stability verdict needs a minimum between two humps flanked by rows, so a
#: table shorter than this cannot describe a distribution the theory can trust (common practice:
#: a few points per feature; 8 leaves two humps with two rows per flank).
MIN_ROWS = 8


class TableError(ValueError):
    """A bad distribution table: one line naming the file and (where it applies) the row."""


def _where(source: str, row: int | None) -> str:
    return f"{source}, row {row}" if row is not None else source


def parse_table_text(text: str, source: str):
    """(u, f, rows) from the text of a table CSV: header ``u,f`` (``#`` comment lines and blank
    lines allowed), one ``u,f`` pair a line.  ``rows`` holds the 1-based line number of each
    data row (for messages).  Raises :class:`TableError` naming ``source`` and the line."""
    header = None
    u, f, rows = [], [], []
    for n, line in enumerate(text.splitlines(), start=1):
        s = line.strip()
        if not s or s.startswith("#"):
            continue
        cells = [c.strip() for c in s.split(",")]
        if header is None:
            header = [c.lower() for c in cells]
            if header != ["u", "f"]:
                raise TableError(f"{_where(source, n)}: the header must be 'u,f', not {s!r}")
            continue
        if len(cells) != 2:
            raise TableError(f"{_where(source, n)}: expected two values 'u,f', got {s!r}")
        try:
            a, b = float(cells[0]), float(cells[1])
        except ValueError:
            raise TableError(f"{_where(source, n)}: not a number in {s!r}") from None
        u.append(a)
        f.append(b)
        rows.append(n)
    if header is None:
        raise TableError(f"{source}: the file is empty (expected a header 'u,f' and rows)")
    return np.array(u, float), np.array(f, float), rows


def read_table_csv(path: str):
    """(u, f, sha256 of the file's bytes) of a table CSV; :class:`TableError` if it cannot be read
    or parsed (the row is named where it applies)."""
    try:
        with open(path, "rb") as fh:
            raw = fh.read()
    except OSError as exc:
        raise TableError(f"{path}: cannot read the table ({exc.strerror or exc})") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise TableError(f"{path}: not a text (UTF-8) CSV file") from None
    u, f, rows = parse_table_text(text, path)
    check_rows(u, f, path, rows)
    return u, f, hashlib.sha256(raw).hexdigest()


def check_rows(u, f, source: str, rows=None) -> None:
    """Refuse a bad table with one line naming ``source`` and the row (``rows``: the line number
    of each entry, else the 1-based entry index)."""
    u = np.asarray(u, float)
    f = np.asarray(f, float)
    rows = list(rows) if rows is not None else list(range(1, u.size + 1))
    if u.shape != f.shape or u.ndim != 1:
        raise TableError(f"{source}: u and f must be two 1-D arrays of one length "
                         f"(got {u.shape} and {f.shape})")
    if u.size < MIN_ROWS:
        raise TableError(f"{source}: {u.size} rows; a table needs at least {MIN_ROWS} (a hump "
                         "needs its rise, top and fall resolved, and the stability verdict a "
                         "minimum between rows)")
    for name, a in (("u", u), ("f", f)):
        bad = np.nonzero(~np.isfinite(a))[0]
        if bad.size:
            i = int(bad[0])
            raise TableError(f"{_where(source, rows[i])}: {name} = {float(a[i])} is not finite")
    neg = np.nonzero(f < 0)[0]
    if neg.size:
        i = int(neg[0])
        raise TableError(f"{_where(source, rows[i])}: f = {f[i]:g} is negative (f >= 0 needed)")
    dec = np.nonzero(np.diff(u) <= 0)[0]
    if dec.size:
        i = int(dec[0]) + 1
        raise TableError(f"{_where(source, rows[i])}: u = {u[i]:g} does not exceed the previous "
                         f"row's u = {u[i - 1]:g} (u must be strictly increasing)")
    if not np.any(f > 0):
        raise TableError(f"{source}: f is zero on every row (no particles)")


def _velocity(u):
    return u / np.sqrt(1.0 + np.square(u))


@dataclass(frozen=True, eq=False)
class DistributionTable:
    """A checked table f(u), normalised to Int f du = 1, with its source and checksum.

    ``u``, ``f``: the rows (f normalised); ``v``: the rows' velocities.  Equality (for decks) is by
    checksum of the rows, so two decks with the same table data are the same deck.
    """
    u: np.ndarray
    f: np.ndarray
    source: str = "<arrays>"
    sha256: str = ""
    v: np.ndarray = field(init=False, repr=False)

    def __post_init__(self):
        u = np.ascontiguousarray(self.u, dtype=float)
        f = np.ascontiguousarray(self.f, dtype=float)
        v = _velocity(u)
        mass = float(np.sum(self._segment_integrals(u, v, f)))
        object.__setattr__(self, "u", u)
        object.__setattr__(self, "v", v)
        # a table already normalised (e.g. read back from a resolved deck) keeps its bits
        object.__setattr__(self, "f", f if abs(mass - 1.0) <= 1e-12 else f / mass)
        if not self.sha256:
            object.__setattr__(self, "sha256", data_sha256(u, f))
        for a in (self.u, self.v, self.f):
            a.setflags(write=False)

    def __eq__(self, other):
        return isinstance(other, DistributionTable) and self.sha256 == other.sha256

    def __hash__(self):
        return hash(self.sha256)

    # -- interpolant ---------------------------------------------------------------------
    @staticmethod
    def _segment_integrals(u, v, f):
        """Int f du over each interval with f linear in v: a u + b gamma on [u_j, u_j+1]."""
        g = np.sqrt(1.0 + u * u)
        b = np.diff(f) / np.diff(v)
        a = f[:-1] - b * v[:-1]
        return a * np.diff(u) + b * np.diff(g)

    def f_at(self, u) -> np.ndarray:
        """f(u) of the interpolant (linear in v between rows, 0 outside)."""
        return np.interp(_velocity(np.asarray(u, float)), self.v, self.f, left=0.0, right=0.0)

    @property
    def support(self) -> tuple[float, float]:
        return float(self.u[0]), float(self.u[-1])

    def cdf_rows(self) -> np.ndarray:
        """The cumulative distribution at the rows (0 at the first row, 1 at the last)."""
        c = np.concatenate([[0.0], np.cumsum(self._segment_integrals(self.u, self.v, self.f))])
        return c / c[-1]

    def cdf_at(self, u) -> np.ndarray:
        """The cumulative distribution Int_{-inf}^{u} f du of the interpolant (exact: a u + b gamma
        on each interval), 0 below the rows and 1 above."""
        u = np.asarray(u, float)
        c = self.cdf_rows()
        j = np.clip(np.searchsorted(self.u, u, side="right") - 1, 0, self.u.size - 2)
        x = np.clip(u, self.u[j], self.u[j + 1])
        b = (self.f[j + 1] - self.f[j]) / (self.v[j + 1] - self.v[j])
        a = self.f[j] - b * self.v[j]
        part = a * (x - self.u[j]) + b * (np.sqrt(1.0 + x * x) - np.sqrt(1.0 + self.u[j] ** 2))
        return np.clip(c[j] + part, 0.0, 1.0)

    def inverse_cdf(self, q, points: int = 1 << 16) -> np.ndarray:
        """u at quantiles q in [0, 1]: the exact CDF (:meth:`cdf_at`) on a fine grid — every row,
        each interval split evenly so the grid holds at least ``points`` nodes — inverted by
        linear interpolation (np.interp), the scheme of the built-in distributions
        (:func:`streamsim.loading.juttner_inverse_cdf`; Devroye 1986, ch. 2)."""
        grid = self._fine_grid(points)
        c = self.cdf_at(grid)
        keep = np.concatenate([[True], np.diff(c) > 0])
        return np.interp(np.asarray(q, float), c[keep], grid[keep])

    def _fine_grid(self, points: int) -> np.ndarray:
        m = max(1, -(-points // (self.u.size - 1)))
        t = np.arange(m) / m
        g = (self.u[:-1, None] + t[None, :] * np.diff(self.u)[:, None]).ravel()
        return np.append(g, self.u[-1])

    def moments(self) -> tuple[float, float]:
        """(mean u, rms spread of u) of the interpolant (fine trapezoid on each interval)."""
        uu = np.linspace(self.u[0], self.u[-1], 4 * self.u.size + 1)
        ff = self.f_at(uu)
        w = np.concatenate([[0.0], 0.5 * (ff[1:] + ff[:-1]) * np.diff(uu)])
        mid = np.concatenate([[uu[0]], 0.5 * (uu[1:] + uu[:-1])])
        m0 = w.sum()
        m1 = float((w * mid).sum() / m0)
        var = float((w * (mid - m1) ** 2).sum() / m0)
        return m1, math.sqrt(max(var, 0.0))

    def tail_note(self) -> str | None:
        """Which tail the table cuts (f at the first or last row above 1e-6 of the peak)."""
        peak = float(self.f.max())
        cut = []
        if self.f[0] > 1e-6 * peak:
            cut.append(f"below u = {self.u[0]:.6g} (f there {self.f[0] / peak:.2g} of the peak)")
        if self.f[-1] > 1e-6 * peak:
            cut.append(f"above u = {self.u[-1]:.6g} (f there {self.f[-1] / peak:.2g} of the peak)")
        if not cut:
            return None
        return "the table cuts the tail " + " and ".join(cut) + "; f = 0 is assumed beyond"

    # -- JSON / deck form ----------------------------------------------------------------
    def to_dict(self) -> dict:
        """The resolved deck's inline form: the rows (f normalised), the file's name and the
        sha256 of its bytes (or of the rows, for arrays), so a run folder reruns without it."""
        return {"source": os.path.basename(self.source), "sha256": self.sha256,
                "u": [float(x) for x in self.u], "f": [float(x) for x in self.f]}

    def to_csv(self) -> str:
        """The rows as a table CSV (f normalised), with the source and checksum as comments."""
        head = (f"# distribution table of streamsim: f(u) normalised to Int f du = 1, linear in "
                f"v = u/sqrt(1+u^2) between rows, 0 outside\n# source: "
                f"{os.path.basename(self.source)}\n# sha256 of the source: {self.sha256}\nu,f\n")
        return head + "".join(f"{a!r},{b!r}\n" for a, b in zip(self.u.tolist(), self.f.tolist()))


def data_sha256(u, f) -> str:
    """sha256 of a table's rows written as the CSV 'u,f' with repr floats (for arrays given
    through the Python API, where no file exists)."""
    text = "u,f\n" + "".join(f"{float(a)!r},{float(b)!r}\n" for a, b in zip(u, f))
    return hashlib.sha256(text.encode()).hexdigest()


def table_from_arrays(u, f, source: str = "<arrays>", sha256: str = "") -> DistributionTable:
    """A checked :class:`DistributionTable` from two arrays (the Python API)."""
    check_rows(u, f, source)
    return DistributionTable(np.asarray(u, float), np.asarray(f, float), source, sha256)


def load_table(path: str) -> DistributionTable:
    """A checked table from a CSV file (:func:`read_table_csv`)."""
    u, f, digest = read_table_csv(path)
    return DistributionTable(u, f, path, digest)


# --------------------------------------------------------------------------------------------
# Deck form: ``table = "FILE"`` (relative to the deck file) or the resolved inline table
# --------------------------------------------------------------------------------------------
#: species keys a table excludes (the table is the whole distribution, drift and spread included)
TABLE_EXCLUSIVE = ("drift_beta", "drift_u", "theta", "temperature_kev", "spread_u")
#: keys of the inline form
INLINE_KEYS = ("source", "sha256", "u", "f")


def anchor_tables(raw: dict, base_dir) -> dict:
    """``raw`` (deck data) with every species' relative ``table`` path made absolute against
    ``base_dir`` (the deck file's folder); modified in place and returned."""
    if not isinstance(raw, dict) or base_dir is None:
        return raw
    for s in raw.get("species") or []:
        if isinstance(s, dict) and isinstance(s.get("table"), str):
            path = os.path.expanduser(s["table"])
            if not os.path.isabs(path):
                s["table"] = os.path.normpath(os.path.join(str(base_dir), path))
    return raw


def table_from_deck_value(value) -> DistributionTable:
    """The table a species' ``table`` key names: a CSV path (absolute, see :func:`anchor_tables`;
    a relative one is taken from the working folder) or the inline form of a resolved deck
    ({source, sha256, u, f}).  Raises :class:`TableError` (one line, file and row)."""
    if isinstance(value, str):
        return load_table(value)
    if isinstance(value, dict):
        extra = [k for k in value if k not in INLINE_KEYS]
        if extra or "u" not in value or "f" not in value:
            raise TableError("an inline table is {u = [...], f = [...]} (optionally source, "
                             f"sha256); got keys {sorted(value)}")
        src = str(value.get("source") or "<inline table>")
        try:
            u = np.asarray(value["u"], dtype=float)
            f = np.asarray(value["f"], dtype=float)
        except (TypeError, ValueError):
            raise TableError(f"{src}: u and f must be lists of numbers") from None
        return table_from_arrays(u, f, src, str(value.get("sha256") or ""))
    raise TableError('must be a CSV file path (a string) or an inline table {u = [...], f = [...]}')
