"""Unit conversion at the case boundary (conversion factors: NIST SP 811, via pint)."""
import pytest

from elastofe.errors import CaseError
from elastofe.units import SYSTEMS, convert_quantity


def test_modulus_in_each_system():
    assert convert_quantity("200 GPa", "stress", SYSTEMS["mm-N"], key="E") == pytest.approx(200000.0)
    assert convert_quantity("200 GPa", "stress", SYSTEMS["m-N"], key="E") == pytest.approx(2e11)
    # 1 psi = 6894.757 Pa (NIST SP 811)
    assert convert_quantity("6894.757 Pa", "stress", SYSTEMS["in-lbf"], key="E") == pytest.approx(1.0, rel=1e-6)


def test_force_and_density():
    # 1 lbf = 4.4482216 N (NIST SP 811)
    assert convert_quantity("450 lbf", "force", SYSTEMS["mm-N"], key="F") == pytest.approx(2001.6997, rel=1e-6)
    # 7850 kg/m^3 in mm-N-s: 7.85e-9 t/mm^3 (1 t = 1 N s^2 / mm)
    assert convert_quantity("7850 kg/m^3", "density", SYSTEMS["mm-N"], key="rho") == pytest.approx(7.85e-9)
    assert SYSTEMS["mm-N"].gravity() == pytest.approx(9806.65)
    assert SYSTEMS["in-lbf"].gravity() == pytest.approx(386.0886, rel=1e-6)


def test_plain_numbers_pass_through():
    assert convert_quantity(4, "length", SYSTEMS["mm-N"], key="size") == 4.0


@pytest.mark.parametrize("value,fragment", [("200 N", "wrong dimension"), ("abc GPa", "cannot read"),
                                            (True, "true/false"), ([1], "expected")])
def test_bad_quantities(value, fragment):
    with pytest.raises(CaseError) as e:
        convert_quantity(value, "stress", SYSTEMS["mm-N"], key="material.E")
    assert "material.E" in str(e.value) and fragment in str(e.value)


@pytest.mark.parametrize("name", sorted(SYSTEMS))
def test_every_label_is_the_unit_of_the_numbers(name):
    """Each output label, read back by pint, is exactly the unit the system's numbers are in (a
    label that says t/mm³ over numbers in kg/m³ would misread by 10^12). The systems are consistent
    by construction (mass = force / acceleration, time in seconds; SI definitions of N and lbf)."""
    from elastofe.units import registry

    ureg = registry()
    system = SYSTEMS[name]
    lab = system.labels
    table = str.maketrans({"·": "*", "²": "^2", "³": "^3", "⁴": "^4"})
    mass = f"({system.force})/({system.acceleration})"
    for kind, unit in (("length", system.length), ("force", system.force), ("stress", system.stress),
                       ("moment", system.moment), ("energy", system.energy), ("density", system.density),
                       ("mass", mass)):
        label = lab[kind].translate(table).replace("in", "inch") if "in" in lab[kind] else \
            lab[kind].translate(table)
        factor = ureg.Quantity(1, label).to(unit).magnitude
        assert factor == pytest.approx(1.0, rel=1e-12), (kind, lab[kind])


@pytest.mark.parametrize("text, kind, expected", [
    # 1 degF difference = 5/9 K (definition of the Fahrenheit degree); per-degree coefficients invert it.
    ("20 degC", "temperature", 20.0), ("36 degF", "temperature", 20.0), ("36 °F", "temperature", 20.0),
    ("12e-6 1/degC", "expansion", 12e-6), ("6.5e-6 1/degF", "expansion", 6.5e-6 * 9 / 5),
    ("6.5e-6 /°F", "expansion", 6.5e-6 * 9 / 5), ("12e-6 1/K", "expansion", 12e-6),
])
def test_degrees_of_a_change_or_a_coefficient_are_differences(text, kind, expected):
    """Datasheets write expansion as "6.5e-6 /°F" and a change as "20 degC"; pint refused both as
    offset arithmetic. Both mean differences of degrees, the same in every unit system."""
    for name in SYSTEMS:
        assert convert_quantity(text, kind, SYSTEMS[name], key="k") == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("name", sorted(SYSTEMS))
def test_gravity_written_as_an_acceleration_is_a_multiple_of_standard_gravity(name):
    """gravity = [0, 0, "-9.80665 m/s^2"] is one standard gravity down (9.80665 m/s^2 exactly,
    CGPM 1901; 386.0886 in/s^2 is the same in inches); plain numbers stay multiples of g."""
    from elastofe.case.load import _Reader, gravity_vector

    rd = _Reader(SYSTEMS[name])
    g = gravity_vector([0, "-9.80665 m/s^2", f"{-9.80665 / 0.0254!r} in/s^2"], "load[1].gravity", rd)
    assert g == pytest.approx((0.0, -1.0, -1.0), rel=1e-12)
    assert gravity_vector([0, 0, -2], "load[1].gravity", rd) == (0.0, 0.0, -2.0)
    with pytest.raises(CaseError, match="multiple of standard gravity"):
        gravity_vector([0, 0, "-1 mm"], "load[1].gravity", rd)


def test_weight_density_is_named_as_such():
    """0.2836 lbf/in^3 is the weight of steel per cubic inch, not its mass density: the message says
    so and names the mass form (1 lb = 0.45359237 kg exactly, so 0.2836 lb/in^3 = 7850 kg/m^3)."""
    with pytest.raises(CaseError, match="weight per volume"):
        convert_quantity("0.2836 lbf/in^3", "density", SYSTEMS["in-lbf"], key="material.density")
    rho = convert_quantity("0.2836 lb/in^3", "density", SYSTEMS["m-N"], key="material.density")
    assert rho == pytest.approx(0.2836 * 0.45359237 / 0.0254 ** 3, rel=1e-12)
    assert rho == pytest.approx(7850.0, rel=2e-4)
