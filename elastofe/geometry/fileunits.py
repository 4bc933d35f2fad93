"""The length unit a CAD file states, read from its text (no CAD kernel needed).

STEP (ISO 10303-21): the units of a representation context are entities such as
``( LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.) )`` or
``( CONVERSION_BASED_UNIT('INCH',#20) LENGTH_UNIT() NAMED_UNIT(#21) )`` with
``#20 = LENGTH_MEASURE_WITH_UNIT(LENGTH_MEASURE(25.4),#10)``; the context lists the ones it uses in
``GLOBAL_UNIT_ASSIGNED_CONTEXT((#..., ...))``.

IGES (version 5.3, global section): parameter 14 is the unit flag (1 inch, 2 mm, 3 named in
parameter 15, 4 foot, 5 mile, 6 metre, 7 kilometre, 8 mil, 9 micron, 10 centimetre, 11 microinch)
and parameter 15 the unit's name.

BREP files carry no unit.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path
from typing import Optional

from ..units import length_unit_name as unit_name

#: SI prefixes of STEP's SI_UNIT (ISO 10303-41 si_prefix).
SI_PREFIX = {"EXA": 1e18, "PETA": 1e15, "TERA": 1e12, "GIGA": 1e9, "MEGA": 1e6, "KILO": 1e3, "HECTO": 1e2,
             "DECA": 1e1, "DECI": 1e-1, "CENTI": 1e-2, "MILLI": 1e-3, "MICRO": 1e-6, "NANO": 1e-9,
             "PICO": 1e-12, "FEMTO": 1e-15, "ATTO": 1e-18}

#: Conversion-based units by the names CAD systems write, for files that omit the factor.
CONVERSION_NAMES = {"INCH": 0.0254, "IN": 0.0254, "FOOT": 0.3048, "FT": 0.3048, "MIL": 2.54e-5,
                    "THOU": 2.54e-5, "MILE": 1609.344, "MICROINCH": 2.54e-8, "YARD": 0.9144,
                    "MILLIMETRE": 1e-3, "MILLIMETER": 1e-3, "CENTIMETRE": 1e-2, "CENTIMETER": 1e-2,
                    "METRE": 1.0, "METER": 1.0}

#: IGES unit flags (parameter 14 of the global section) in metres; 3 means "named in parameter 15".
IGES_FLAGS = {1: 0.0254, 2: 1e-3, 4: 0.3048, 5: 1609.344, 6: 1.0, 7: 1e3, 8: 2.54e-5, 9: 1e-6, 10: 1e-2,
              11: 2.54e-8}
IGES_NAMES = {"IN": 0.0254, "INCH": 0.0254, "MM": 1e-3, "FT": 0.3048, "MI": 1609.344, "M": 1.0, "KM": 1e3,
              "MIL": 2.54e-5, "UM": 1e-6, "MICRON": 1e-6, "CM": 1e-2, "UIN": 2.54e-8}


@dataclass(frozen=True)
class FileUnit:
    """A length unit read from a file: its short name and its size in metres.

    ``note`` says what was uncertain (several different units in one file), empty otherwise.
    """

    name: str
    metres: float
    note: str = ""


def file_length_unit(path: Path) -> Optional[FileUnit]:
    """The length unit ``path`` states (STEP or IGES), or None when it states none or it cannot be read."""
    suffix = Path(path).suffix.lower()
    try:
        data = Path(path).read_bytes()
    except OSError:
        return None
    text = data.decode("latin-1")
    if suffix in (".step", ".stp"):
        return step_length_unit(text)
    if suffix in (".iges", ".igs"):
        return iges_length_unit(text)
    return None


# ----------------------------------------------------------------------------- STEP
_KEYWORDS = re.compile(r"LENGTH_UNIT|MEASURE_WITH_UNIT|GLOBAL_UNIT_ASSIGNED_CONTEXT", re.IGNORECASE)
_ID = re.compile(r"#(\d+)\s*=")
_SI = re.compile(r"SI_UNIT\s*\(\s*(\$|\*|\.\s*\w+\s*\.)\s*,\s*\.\s*METRE\s*\.\s*\)", re.IGNORECASE)
_CONV = re.compile(r"CONVERSION_BASED_UNIT\s*\(\s*'((?:[^']|'')*)'\s*,\s*#(\d+)\s*\)", re.IGNORECASE)
_MEASURE = re.compile(r"LENGTH_MEASURE\s*\(\s*([-+0-9.Ee]+)\s*\)\s*\)?\s*,\s*#(\d+)", re.IGNORECASE)
_CONTEXT = re.compile(r"GLOBAL_UNIT_ASSIGNED_CONTEXT\s*\(\s*\(([^)]*)\)", re.IGNORECASE)
_LENGTH_UNIT = re.compile(r"\bLENGTH_UNIT\s*\(", re.IGNORECASE)


def _statements(text: str) -> dict[int, str]:
    """The STEP instances that mention units, by instance number (a scan for a few keywords only,
    so a file of hundreds of MB costs one pass of a regular expression)."""
    out: dict[int, str] = {}
    for m in _KEYWORDS.finditer(text):
        start = text.rfind(";", 0, m.start()) + 1
        end = text.find(";", m.end())
        stmt = text[start:end if end >= 0 else len(text)]
        ids = list(_ID.finditer(stmt))
        if not ids:
            continue
        # The last "#n =" before the keyword is this instance's (references are never followed by "=").
        num = int(ids[-1].group(1))
        out[num] = stmt[ids[-1].end():]
    return out


def _step_metres(num: int, stmts: dict[int, str], depth: int = 0) -> Optional[tuple[str, float]]:
    """(name, metres) of the length unit instance ``num``."""
    s = stmts.get(num)
    if s is None or depth > 6 or not _LENGTH_UNIT.search(s):
        return None
    si = _SI.search(s)
    if si:
        prefix = si.group(1).strip(". ").upper()
        metres = 1.0 if prefix in ("$", "*", "") else SI_PREFIX.get(prefix)
        return (unit_name(metres), metres) if metres is not None else None
    conv = _CONV.search(s)
    if conv:
        name = conv.group(1).replace("''", "'").strip()
        ref = stmts.get(int(conv.group(2)), "")
        meas = _MEASURE.search(ref)
        if meas:
            base = _step_metres(int(meas.group(2)), stmts, depth + 1)
            try:
                value = float(meas.group(1))
            except ValueError:
                value = None
            if base is not None and value is not None and value > 0:
                return unit_name(value * base[1]), value * base[1]
        metres = CONVERSION_NAMES.get(name.upper().replace(" ", ""))
        if metres is not None:
            return unit_name(metres), metres
    return None


def step_length_unit(text: str) -> Optional[FileUnit]:
    """The length unit of a STEP file's geometry (the one its representation contexts assign)."""
    stmts = _statements(text)
    used: list[int] = []
    contexts = 0
    for s in stmts.values():
        for ctx in _CONTEXT.finditer(s):
            contexts += 1
            used += [int(x) for x in re.findall(r"#(\d+)", ctx.group(1))]
    candidates = [n for n in used if n in stmts and _LENGTH_UNIT.search(stmts[n])]
    if contexts and not candidates:
        # Contexts that assign no length unit: the file states none (OpenCASCADE then takes the
        # numbers as they are, whatever unit entities lie unused in the file).
        return None
    if not candidates:  # no context found: every length unit that is not only a base of another
        bases = {int(m.group(2)) for s in stmts.values() for m in _MEASURE.finditer(s)}
        candidates = [n for n, s in stmts.items() if _LENGTH_UNIT.search(s) and n not in bases] or \
                     [n for n, s in stmts.items() if _LENGTH_UNIT.search(s)]
    found = [u for u in (_step_metres(n, stmts) for n in dict.fromkeys(candidates)) if u is not None]
    if not found:
        return None
    distinct = {round(m, 15): name for name, m in found}
    note = ""
    if len(distinct) > 1:
        note = f"the file states several length units ({', '.join(distinct.values())}); the first was used"
    return FileUnit(found[0][0], found[0][1], note)


# ----------------------------------------------------------------------------- IGES
def _iges_global_parameters(text: str) -> list[str]:
    """The parameters of an IGES global section, Hollerith strings decoded."""
    lines = [ln.rstrip("\r\n") for ln in text.splitlines()]
    g = "".join(ln[:72].ljust(72) for ln in lines if len(ln) >= 73 and ln[72] == "G")
    pd, rd = ",", ";"
    out: list[str] = []
    i, n = 0, len(g)

    def field(i: int, pd: str, rd: str) -> tuple[str, int]:
        j = i
        while j < n and g[j] == " ":
            j += 1
        m = re.match(r"(\d+)H", g[j:])
        if m:
            k = j + m.end()
            return g[k:k + int(m.group(1))], k + int(m.group(1))
        k = j
        while k < n and g[k] not in (pd, rd):
            k += 1
        return g[j:k].strip(), k

    # Parameters 1 and 2 define the delimiters themselves (default "," and ";").
    for idx in range(2):
        if i < n and g[i] == pd:
            out.append(pd if idx == 0 else rd)
        else:
            val, i = field(i, pd, rd)
            out.append(val)
            if idx == 0 and val:
                pd = val[0]
            elif idx == 1 and val:
                rd = val[0]
        if i < n and g[i] in (pd, rd):
            i += 1
    while i < n:
        val, i = field(i, pd, rd)
        out.append(val)
        if i >= n or g[i] == rd:
            break
        i += 1
    return out


def iges_length_unit(text: str) -> Optional[FileUnit]:
    """The length unit of an IGES file (global parameters 14 and 15)."""
    try:
        params = _iges_global_parameters(text)
    except Exception:  # a malformed global section: no unit read
        return None
    if len(params) < 14:
        return None
    try:
        flag = int(float(params[13] or "1"))  # the standard's default flag is 1 (inches)
    except ValueError:
        return None
    name = params[14].strip().upper() if len(params) > 14 else ""
    metres = IGES_FLAGS.get(flag)
    if flag == 3 or metres is None:
        metres = IGES_NAMES.get(name.replace(" ", ""))
    if metres is None:
        return None
    return FileUnit(unit_name(metres), metres)
