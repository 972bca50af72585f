"""One line of the validation table, and the table as text and CSV."""
from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field

from streamsim.numbers import finite_or_none


@dataclass
class Check:
    """problem, quantity, measured ± error, reference, its source, tolerance, pass/fail.

    ``kind`` says how the tolerance reads: "relative" (|m - r| <= tol |r|), "absolute"
    (|m - r| <= tol) or "upper" (m <= r: the reference is a bound, tol unused).
    ``why`` documents the tolerance; ``note`` holds anything the reader needs beside the numbers.
    """
    problem: str
    quantity: str
    measured: float | None
    error: float | None
    reference: float
    source: str
    tolerance: float
    kind: str = "relative"
    why: str = ""
    note: str = ""
    passed: bool = field(init=False)

    def __post_init__(self):
        self.passed = self.evaluate()

    def evaluate(self) -> bool:
        m, r = finite_or_none(self.measured), self.reference
        if m is None:
            return False
        if self.kind == "upper":
            return m <= r
        if self.kind == "relative":
            return abs(m - r) <= self.tolerance * abs(r)
        return abs(m - r) <= self.tolerance

    @property
    def deviation(self) -> float | None:
        """(m - r)/r for relative checks, m - r for absolute ones, m for bounds."""
        m = finite_or_none(self.measured)
        if m is None:
            return None
        if self.kind == "relative":
            return (m - self.reference) / self.reference if self.reference else None
        if self.kind == "absolute":
            return m - self.reference
        return m

    def tolerance_text(self) -> str:
        if self.kind == "upper":
            return f"<= {_g(self.reference, 2)}"
        if self.kind == "relative":
            return f"±{100 * self.tolerance:.3g} %"
        return f"±{_g(self.tolerance, 2)}"

    def measured_text(self) -> str:
        m, e = finite_or_none(self.measured), finite_or_none(self.error)
        if m is None:
            return "no result"
        if not e:
            return _g(m, 6)
        return f"{_g(m, 6)} ± {_g(e, 2)}"

    def reference_text(self) -> str:
        return ("bound" if self.kind == "upper" else _g(self.reference, 6))

    def row(self) -> dict:
        return {"problem": self.problem, "quantity": self.quantity,
                "measured": self.measured, "error": self.error, "reference": self.reference,
                "source": self.source, "tolerance": self.tolerance_text(),
                "pass": "pass" if self.passed else "FAIL"}


def _g(x, digits: int = 4) -> str:
    if x is None:
        return "-"
    if x == 0:
        return "0"
    ax = abs(x)
    if 1e-3 <= ax < 1e5:
        s = f"{x:.{digits}g}"
    else:
        s = f"{x:.{max(digits - 1, 1)}e}"
    return s


COLUMNS = ("problem", "quantity", "measured ± error", "reference", "source", "tolerance", "result")


def text_rows(checks) -> list[tuple[str, ...]]:
    return [(c.problem, c.quantity, c.measured_text(), c.reference_text(), c.source,
             c.tolerance_text(), "pass" if c.passed else "FAIL") for c in checks]


def table_text(checks, source_width: int = 46) -> str:
    """The table with aligned columns for a terminal (long sources are shortened)."""
    rows = []
    for r in text_rows(checks):
        src = r[4] if len(r[4]) <= source_width else r[4][:source_width - 1] + "…"
        rows.append(r[:4] + (src,) + r[5:])
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h)
              for i, h in enumerate(COLUMNS)]
    line = lambda cells: "  ".join(c.ljust(w) for c, w in zip(cells, widths)).rstrip()  # noqa: E731
    out = [line(COLUMNS), line(["-" * w for w in widths])]
    out += [line(r) for r in rows]
    return "\n".join(out)


def table_markdown(checks) -> str:
    out = ["| " + " | ".join(COLUMNS) + " |", "|" + "---|" * len(COLUMNS)]
    for r in text_rows(checks):
        cells = list(r)
        cells[-1] = "pass" if cells[-1] == "pass" else "**FAIL**"
        out.append("| " + " | ".join(c.replace("|", "\\|") for c in cells) + " |")
    return "\n".join(out)


CSV_FIELDS = ("problem", "quantity", "measured", "error", "reference", "source", "tolerance",
              "tolerance_kind", "tolerance_value", "pass", "why_this_tolerance", "note")


def table_csv(checks) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(CSV_FIELDS)
    for c in checks:
        m, e = finite_or_none(c.measured), finite_or_none(c.error)
        w.writerow([c.problem, c.quantity, "" if m is None else repr(m),
                    "" if e is None else repr(e), repr(float(c.reference)),
                    c.source, c.tolerance_text(), c.kind, repr(float(c.tolerance)),
                    "pass" if c.passed else "fail", c.why, c.note])
    return buf.getvalue()
