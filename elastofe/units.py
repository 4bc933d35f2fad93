"""Unit systems and conversion of user input at the boundary.

The numerics never see a unit: the case loader converts every number to the case's consistent
system here, and outputs are labelled with :attr:`UnitSystem.labels`.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache

from .errors import CaseError

#: Standard gravity in m/s^2 (CGPM 1901, the conventional value).
STANDARD_GRAVITY_SI = 9.80665

#: Metres per unit of the length units known by short name (exact by each unit's definition; the
#: inch is 25.4 mm exactly since 1959). The first name of a size is the one shown in messages.
NAMED_LENGTHS = {"m": 1.0, "mm": 1e-3, "cm": 1e-2, "um": 1e-6, "km": 1e3, "in": 0.0254, "ft": 0.3048,
                 "mil": 2.54e-5, "uin": 2.54e-8, "mi": 1609.344, "dm": 0.1, "nm": 1e-9}
#: Other spellings of the same units.
LENGTH_ALIASES = {"inch": "in", "inches": "in", "metre": "m", "meter": "m", "metres": "m", "meters": "m",
                  "millimetre": "mm", "millimeter": "mm", "centimetre": "cm", "centimeter": "cm",
                  "micron": "um", "µm": "um", "micrometre": "um", "micrometer": "um", "foot": "ft",
                  "feet": "ft", "thou": "mil", "kilometre": "km", "kilometer": "km"}


def length_unit_name(metres: float) -> str:
    """The short name of a length unit of ``metres`` m ("mm", "in", ...), or "<x> m" for others."""
    for name, m in NAMED_LENGTHS.items():
        if abs(metres - m) <= 1e-9 * m:
            return name
    return f"{metres:.10g} m"


def length_unit_metres(unit: str, *, key: str = "geometry.unit") -> float:
    """Metres per one ``unit`` (a short name such as "mm", "in", a longer one such as "inch", or
    any length unit pint knows); raises :class:`CaseError` on ``key`` for anything else."""
    if not isinstance(unit, str) or isinstance(unit, bool):
        raise CaseError(key, unit, "must be a length unit in quotes, e.g. \"mm\", \"in\" or \"m\"")
    text = unit.strip()
    name = LENGTH_ALIASES.get(text.lower(), text)
    if name in NAMED_LENGTHS:
        return NAMED_LENGTHS[name]
    expected = "a length unit, e.g. \"mm\", \"in\" or \"m\""
    if not text or _quantity_text_problem("1 " + text):
        raise CaseError(key, unit, f"is not {expected}")
    try:
        q = registry().Quantity("1 " + text)
        out = float(q.to("m").magnitude)
    except Exception:  # pint's parser and dimension errors alike
        raise CaseError(key, unit, f"is not {expected}") from None
    import math

    if not (math.isfinite(out) and out > 0):
        raise CaseError(key, unit, f"is not {expected}")
    return out


@dataclass(frozen=True)
class UnitSystem:
    """A consistent unit system: length, force and the units derived from them.

    Attributes
    ----------
    name : str
        Name used in the case file (``"mm-N"``, ``"m-N"``, ``"in-lbf"``).
    length, force, stress, density, acceleration, moment, energy, temperature : str
        pint unit expressions of each quantity in this system.
    """

    name: str
    length: str
    force: str
    stress: str
    density: str
    acceleration: str
    moment: str
    energy: str
    temperature: str = "kelvin"

    @property
    def labels(self) -> dict[str, str]:
        """Short labels for outputs."""
        # Mass is force / acceleration of the system (time in seconds): N / (mm/s²) = 1000 kg = t.
        short = {
            "mm-N": {"length": "mm", "force": "N", "stress": "MPa", "moment": "N·mm", "energy": "N·mm",
                     "mass": "t", "density": "t/mm³"},
            "m-N": {"length": "m", "force": "N", "stress": "Pa", "moment": "N·m", "energy": "J",
                    "mass": "kg", "density": "kg/m³"},
            "in-lbf": {"length": "in", "force": "lbf", "stress": "psi", "moment": "lbf·in", "energy": "lbf·in",
                       "mass": "lbf·s²/in", "density": "lbf·s²/in⁴"},
        }
        return short[self.name]

    def gravity(self) -> float:
        """Standard gravity in this system's acceleration unit."""
        return convert_quantity(f"{STANDARD_GRAVITY_SI} m/s^2", "acceleration", self, key="gravity")


SYSTEMS: dict[str, UnitSystem] = {
    "mm-N": UnitSystem("mm-N", "mm", "N", "MPa", "N*s^2/mm^4", "mm/s^2", "N*mm", "N*mm"),
    "m-N": UnitSystem("m-N", "m", "N", "Pa", "kg/m^3", "m/s^2", "N*m", "J"),
    "in-lbf": UnitSystem("in-lbf", "inch", "lbf", "psi", "lbf*s^2/inch^4", "inch/s^2", "lbf*inch", "lbf*inch"),
}

#: Kinds of quantity a case-file number can be, and a valid example of each for messages.
EXAMPLES = {
    "length": "a length such as 4.0 or \"4 mm\"",
    "force": "a force such as 1200 or \"450 lbf\"",
    "stress": "a stress such as 200000 or \"200 GPa\"",
    "density": "a density such as \"7850 kg/m^3\"",
    "acceleration": "an acceleration such as \"9.81 m/s^2\"",
    "moment": "a moment such as \"50 N*m\"",
    "dimensionless": "a plain number",
    "temperature": "a temperature difference such as 20 or \"20 delta_degC\"",
    "expansion": "an expansion coefficient such as 1.2e-5 or \"12e-6 1/K\"",
    "stiffness_per_area": "a stiffness per area such as 50 or \"50 N/mm^3\"",
    "stress_per_length": "a pressure gradient such as -9.81e-6 or \"-0.0098 MPa/m\"",
    "frequency": "a frequency such as 120 (Hz) or \"7200 rpm\"",
}


@lru_cache(maxsize=1)
def registry():
    """The one pint registry of the package (created on first use)."""
    import pint

    return pint.UnitRegistry()


def target_unit(kind: str, system: UnitSystem) -> str:
    """pint expression of ``kind`` in ``system``."""
    if kind in ("length", "force", "stress", "density", "acceleration", "moment", "energy"):
        return getattr(system, kind)
    if kind == "temperature":
        return "delta_degC"
    if kind == "expansion":
        return "1/delta_degC"
    if kind == "stiffness_per_area":
        return f"({system.force})/({system.length})^3"
    if kind == "stress_per_length":
        return f"({system.stress})/({system.length})"
    if kind == "dimensionless":
        return "dimensionless"
    if kind == "frequency":  # every consistent system of ours has the second as its time unit
        return "Hz"
    raise ValueError(f"unknown quantity kind {kind!r}")


_DEGREE = re.compile(r"(?<![A-Za-z_])(degC|degF|°C|°F|celsius|fahrenheit|degree_Celsius|degree_Fahrenheit)"
                     r"(?![A-Za-z_])", re.IGNORECASE)
_NUMBER = re.compile(r"[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?")
_UNIT_CHARS = re.compile(r"[A-Za-z0-9_ */^().+\-°µΩ]*")
_EXPONENT = re.compile(r"(\^|\*\*)\s*\(?\s*[+-]?(\d+(\.\d*)?|\.\d+)")
_CHAINED = re.compile(r"(\^|\*\*)[^A-Za-z°µΩ]*(\^|\*\*)")


def _quantity_text_problem(text: str) -> str:
    """Why ``text`` is not a plain "number unit" string (empty when it is).

    pint evaluates its input as an expression, so "9**9**9" would run for ever and exhaust
    memory; only a number followed by a short unit expression with small exponents is passed on.
    """
    if not text:
        return "is empty"
    if len(text) > 80:
        return "is too long for a number with a unit"
    m = _NUMBER.match(text)
    if not m:
        return "must start with a number, e.g. \"200 GPa\""
    rest = text[m.end():]
    if not _UNIT_CHARS.fullmatch(rest):
        return "contains characters that belong in no unit"
    if _CHAINED.search(rest):
        return "has chained exponents"
    for e in _EXPONENT.finditer(rest):
        if len(e.group(2).replace(".", "")) > 2:
            return "has an exponent too large for a unit"
    return ""


_ARTICLE_KIND = {"length": "a length", "force": "a force", "stress": "a stress (or pressure)",
                 "density": "a density", "acceleration": "an acceleration", "moment": "a moment",
                 "dimensionless": "a plain number", "temperature": "a temperature difference",
                 "expansion": "an expansion coefficient", "stiffness_per_area": "a stiffness per area",
                 "energy": "an energy", "mass": "a mass", "area": "an area", "volume": "a volume",
                 "time": "a time", "frequency": "a frequency"}


def _kind_of(q, system: UnitSystem) -> str:
    """What kind of quantity ``q`` is, in words ("a force"), or '' when none of ours."""
    ureg = registry()
    extra = {"mass": "kg", "area": "m^2", "volume": "m^3", "time": "s"}
    for kind in ("length", "force", "stress", "density", "acceleration", "moment", "dimensionless",
                 "mass", "area", "volume", "time"):
        try:
            unit = extra.get(kind) or target_unit(kind, system)
            if ureg.Quantity(1, unit).dimensionality == q.dimensionality:
                return _ARTICLE_KIND[kind]
        except Exception:  # pragma: no cover - a unit of ours that pint cannot build
            continue
    return ""


def convert_quantity(value: object, kind: str, system: UnitSystem, *, key: str) -> float:
    """Convert a case-file number or a string with a unit to ``system``.

    Parameters
    ----------
    value : float or int or str
        A plain number (already in the system) or a string such as ``"200 GPa"``.
    kind : str
        One of :data:`EXAMPLES`.
    system : UnitSystem
    key : str
        Key path used in error messages.

    Returns
    -------
    float
        The value in ``system``.
    """
    if isinstance(value, bool):
        raise CaseError(key, value, f"expected {EXAMPLES[kind]}, not a true/false value")
    if isinstance(value, (int, float)):
        try:
            return float(value)
        except OverflowError:
            raise CaseError(key, value, f"is too large; expected {EXAMPLES[kind]}") from None
    if not isinstance(value, str):
        raise CaseError(key, value, f"expected {EXAMPLES[kind]}")
    import pint

    ureg = registry()
    text = value.strip()
    if kind in ("temperature", "expansion"):
        # A change of temperature, or a coefficient per degree, is a difference of degrees: pint
        # refuses "20 degC" or "12e-6 1/degC" as offset arithmetic, so the scale's degree is named
        # as the difference it means here (1 delta_degC = 1 K, 1 delta_degF = 5/9 K).
        text = _DEGREE.sub(lambda m: "delta_degF" if m.group(1).lower().endswith(("f", "fahrenheit"))
                           else "delta_degC", text)
    problem = _quantity_text_problem(text)
    if problem:
        raise CaseError(key, value, f"cannot read this as a quantity: {problem}; expected {EXAMPLES[kind]}")
    try:
        q = ureg.Quantity(text)
    except (pint.errors.UndefinedUnitError, pint.errors.DefinitionSyntaxError, AttributeError,
            TypeError, ValueError, SyntaxError, AssertionError, KeyError, IndexError,
            ZeroDivisionError) as err:
        raise CaseError(key, value, f"cannot read this as a quantity ({err}); expected {EXAMPLES[kind]}") from None
    except Exception as err:  # pint raises a wide variety of parser errors
        raise CaseError(key, value,
                        f"cannot read this as a quantity ({type(err).__name__}); expected {EXAMPLES[kind]}") from None
    if not isinstance(q, ureg.Quantity):
        return float(q)
    if kind == "frequency":
        # pint counts a revolution as 2 pi radians and radians as dimensionless, so "7200 rpm" or
        # "100 rad/s" would come out in rad/s where Hz (cycles per second) are meant.
        units_text = str(q.units)
        try:
            if "revolution" in units_text or "rpm" in text:
                return float(q.to("revolution/second").magnitude)
            if "radian" in units_text:
                return float(q.to("radian/second").magnitude) / (2.0 * 3.141592653589793)
        except pint.errors.DimensionalityError:
            pass
    try:
        if kind == "temperature" and q.units in (ureg.degC, ureg.kelvin, ureg.degF):
            # A temperature *change* written with an absolute scale: take it as a difference.
            q = ureg.Quantity(q.magnitude, {ureg.degC: "delta_degC", ureg.kelvin: "kelvin",
                                            ureg.degF: "delta_degF"}[q.units])
        out = float(q.to(target_unit(kind, system)).magnitude)
    except pint.errors.DimensionalityError:
        found = _kind_of(q, system)
        what = (f"has the wrong dimension: it is {found}, not {_ARTICLE_KIND[kind]}" if found
                else f"has the wrong dimension ({q.dimensionality})")
        if kind == "density" and q.dimensionality == ureg.Quantity(1, "N/m^3").dimensionality:
            # Datasheets in lbf and inches often give the weight per volume ("0.284 lbf/in^3").
            what = ("is a weight per volume (force / length^3), not a mass density: give the mass per volume, "
                    "e.g. \"0.2836 lb/in^3\" (pounds-mass) or \"7850 kg/m^3\"")
        raise CaseError(key, value, f"{what}; expected {EXAMPLES[kind]}") from None
    import math

    if not math.isfinite(out):
        raise CaseError(key, value, f"must be finite; expected {EXAMPLES[kind]}")
    return out
