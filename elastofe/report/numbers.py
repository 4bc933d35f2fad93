"""Numbers for people: significant figures matched to the quantity, units on every number, thousands
separators, powers of ten written as such, and round-off noise shown as zero with its tolerance.

Every function returns text (HTML-escaped where it takes text); none reads a file.
"""
from __future__ import annotations

import html
import math
from typing import Optional

#: Significant figures per kind of quantity (stresses and displacements to 4: a mesh rarely settles
#: them further; ratios and percentages to 3).
FIGURES = {"stress": 4, "length": 4, "force": 4, "moment": 4, "area": 4, "energy": 4, "ratio": 3,
           "percent": 3, "count": 0, "modulus": 4, "density": 4, "time": 3, "plain": 4}
#: A component smaller than this share of its reference (the total load, the largest component) is
#: round-off of the solve and shown as 0 (common practice for double-precision results).
NOISE = 1e-9

_SUP = str.maketrans("0123456789-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻")
_UNSUP = {v: k for k, v in zip("0123456789-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻")}

#: Density in the case's units, shown in the units people quote: (factor, unit).
DENSITY_SHOWN = {"mm": (1e12, "kg/m³"), "m": (1.0, "kg/m³"), "in": (386.08858, "lb/in³")}
DENSITY_CASE_UNITS = {"mm": "t/mm³", "m": "kg/m³", "in": "lbf·s²/in⁴"}


def esc(v) -> str:
    return html.escape(str(v), quote=True)


def _finite(v) -> Optional[float]:
    if v is None or isinstance(v, bool):
        return None
    try:
        x = float(v)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def fmt(v, figures: int = 4) -> str:
    """``v`` to ``figures`` significant figures: ``200,000``, ``81.02``, ``0.2207``, ``5.1×10⁻¹⁴``;
    "–" for None or NaN; integers with thousands separators."""
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, int):
        return f"{v:,}"
    x = _finite(v)
    if x is None:
        return "–" if v is None or isinstance(v, (int, float)) else esc(v)
    if x == 0:
        return "0"
    ax = abs(x)
    figures = max(1, figures)
    e = math.floor(math.log10(ax))
    # rounding may carry into the next decade (9.9996 -> 10.00)
    if round(ax / 10 ** (e - figures + 1)) >= 10 ** figures:
        e += 1
    if -4 <= e < 9:
        dec = max(0, figures - 1 - e)
        if figures - 1 - e < 0:
            # Large values (stresses in Pa or psi) keep only their significant figures: 157,582,830
            # to 4 figures is 157,600,000, not nine figures the mesh never settled.
            x = round(x, figures - 1 - e)
        s = f"{x:,.{dec}f}"
        if "." in s:
            s = s.rstrip("0").rstrip(".")
        return s
    m, ex = f"{x:.{figures - 1}e}".split("e")
    if "." in m:
        m = m.rstrip("0").rstrip(".")
    return f"{m}×10{str(int(ex)).translate(_SUP)}"


def prose(text) -> str:
    """Escaped text with its numbers in e-notation (as messages from the checks write them) turned
    into powers of ten: ``1.3e-14`` -> ``1.3×10⁻¹⁴``."""
    import re

    def rep(m):
        ex = str(int(m.group(2))).translate(_SUP)
        return f"{m.group(1)}×10{ex}"

    return re.sub(r"(?<![\w.])(\d+(?:\.\d+)?)[eE]([+-]?\d+)(?![\w.])", rep, esc(text))


def parse(text: str) -> float:
    """The number of a text written by :func:`fmt` (for tests and scripts reading the report)."""
    t = text.strip().replace(",", "").replace("−", "-")
    if "×10" in t:
        m, ex = t.split("×10", 1)
        ex = "".join(_UNSUP.get(c, c) for c in ex)
        return float(m) * 10.0 ** int(ex)
    return float(t)


def is_noise(v, ref, tol: float = NOISE) -> bool:
    x, r = _finite(v), _finite(ref)
    return x is not None and r is not None and r > 0 and abs(x) <= tol * r


def qty(v, unit: str = "", figures: int = 4, ref=None, tol: float = NOISE) -> str:
    """A number with its unit; a value within ``tol * ref`` of zero is shown as 0 (round-off)."""
    u = f"\u202f{esc(unit)}" if unit else ""
    if ref is not None and is_noise(v, ref, tol):
        return f"0{u}"
    return f"{fmt(v, figures)}{u}" if _finite(v) is not None or isinstance(v, int) else fmt(v, figures)


def vec(v, unit: str = "", figures: int = 4, ref=None, tol: float = NOISE) -> str:
    """A vector ``(a, b, c) unit``; components below ``tol`` times ``ref`` (default: the vector's
    largest component) shown as 0."""
    if v is None:
        return "–"
    comps = [_finite(c) for c in v]
    big = max((abs(c) for c in comps if c is not None), default=0.0)
    r = big if ref is None else ref
    parts = ["0" if is_noise(c, r, tol) else fmt(c, figures) for c in comps]
    u = f"\u202f{esc(unit)}" if unit else ""
    return "(" + ", ".join(parts) + ")" + u


def coordinates(p, size: float, unit: str = "") -> str:
    """A point to a resolution of 1e-4 of the part size (no more digits than a mesh can mean)."""
    if p is None:
        return "–"
    res = max(size, 1e-300) * 1e-4
    dec = max(0, -math.floor(math.log10(res)))
    parts = []
    for c in p:
        x = _finite(c)
        if x is None:
            parts.append("–")
            continue
        x = 0.0 if abs(x) < res / 2 else x
        s = f"{x:,.{dec}f}"
        if "." in s:
            s = s.rstrip("0").rstrip(".")
        parts.append("0" if s in ("-0", "") else s)
    u = f"\u202f{esc(unit)}" if unit else ""
    return "(" + ", ".join(parts) + ")" + u


def percent(ratio, figures: int = 3) -> str:
    x = _finite(ratio)
    return "–" if x is None else f"{fmt(100 * x, figures)}\u202f%"


def noise_note(ref: float, unit: str, what: str = "the total applied load") -> str:
    """The sentence that states the round-off tolerance once per table."""
    return (f"Components smaller than {fmt(NOISE, 1)} of {what} ({fmt(ref)}\u202f{esc(unit)}) are round-off "
            "of the solve and shown as 0.")
