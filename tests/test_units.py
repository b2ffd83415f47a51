"""Physical units: the N-body scale against the IAU/CODATA constants and the derived check values."""

from __future__ import annotations

import subprocess
import sys

import mpmath
import numpy as np
import pytest

from loschmidt import units
from loschmidt.units import AU, C, DAY, GM_SUN, PARSEC, PLANCK_LENGTH, YEAR, Scale

MYR = 1e6 * YEAR


def half_unit(quoted: str) -> float:
    """Half a unit in the last digit of a quoted decimal: the rounding of the published value."""
    mantissa = quoted.lower().split("e")[0]
    exp = int(quoted.lower().split("e")[1]) if "e" in quoted.lower() else 0
    decimals = len(mantissa.split(".")[1]) if "." in mantissa else 0
    return 0.5 * 10.0 ** (exp - decimals)


def test_constants():
    assert AU == 149597870700.0  # IAU 2012 Resolution B2, exact
    assert GM_SUN == 1.3271244e20  # IAU 2015 Resolution B3, nominal
    assert C == 299792458.0  # SI, exact
    assert PLANCK_LENGTH == 1.616255e-35  # CODATA 2018
    assert YEAR == 365.25 * 86400.0 == 31557600.0  # Julian year (IAU)
    with mpmath.workdps(40):  # pc = (648000 / pi) au, IAU 2015 Resolution B2, nearest double
        assert PARSEC == float(648000 / mpmath.pi * 149597870700)
    assert PARSEC == pytest.approx(3.0856775814913673e16, rel=1e-16)


# Derived values quoted in the design (METHODS.md section 7), computed from the IAU constants:
# each must be reproduced to the last digit quoted.
@pytest.mark.parametrize(
    "length, time_quoted, time_unit, c_quoted",
    [
        (PARSEC, "14.9096", MYR, "4.5713e6"),  # 1 pc, 1 M_sun: 14.9096 Myr, c = 4.5713e6
        (AU, "0.159158", YEAR, "10065.32"),  # 1 au, 1 M_sun: 0.159158 yr, c = 10065.32
    ],
)
def test_derived_check_values(length, time_quoted, time_unit, c_quoted):
    s = Scale(mass=1.0, length=length)
    assert abs(s.time / time_unit - float(time_quoted)) <= half_unit(time_quoted)
    assert abs(s.c - float(c_quoted)) <= half_unit(c_quoted)
    assert abs(s.to_years(1.0) * YEAR / time_unit - float(time_quoted)) <= half_unit(time_quoted)


def test_against_independent_mpmath_formulas():
    s = Scale(mass=2.5, length=PARSEC)
    with mpmath.workdps(40):
        gm = 2.5 * mpmath.mpf(GM_SUN)
        L = 648000 / mpmath.pi * mpmath.mpf(AU)
        T = mpmath.sqrt(L**3 / gm)
        assert s.time == float(T)
        assert s.velocity == float(mpmath.sqrt(gm / L))
        assert s.c == float(mpmath.mpf(C) * T / L)
        assert s.planck_length == float(mpmath.mpf(PLANCK_LENGTH) / L)
    with mpmath.workdps(50):
        # decimal strings carry the digits a double cannot; they start from the double inputs
        L = mpmath.mpf(PARSEC)
        c_exact = mpmath.mpf(C) * mpmath.sqrt(L**3 / gm) / L
        assert abs(mpmath.mpf(s.decimal("c", 35)) / c_exact - 1) < mpmath.mpf("1e-34")
        assert len(s.decimal("c", 35).split("e")[0].replace(".", "").lstrip("-")) == 35
    assert s.gm == 2.5 * GM_SUN
    # nominal solar mass GM_sun / G(CODATA 2018) = 1.98840987e30 kg [memory]
    assert s.mass_kg == pytest.approx(2.5 * 1.98840987e30, rel=1e-8)


def test_year_length_from_gauss_constant():
    """Kepler's third law with the au and GM_sun: a massless body at 1 au orbits in 2 pi / k days,
    k = 0.01720209895 the Gaussian gravitational constant (Gauss 1809; IAU 1976), to about 1e-10."""
    s = Scale(mass=1.0, length=AU)
    period_days = 2 * np.pi * s.time / DAY
    assert period_days == pytest.approx(2 * np.pi / 0.01720209895, rel=1e-9)


def test_planck_length_in_parsec_units():
    s = Scale(1.0, PARSEC)
    assert s.planck_length == pytest.approx(1.616255e-35 / 3.0856775814913673e16, rel=1e-15)
    assert 5.2e-52 < s.planck_length < 5.3e-52


def test_conversions_round_trip_and_arrays():
    s = Scale(mass=1e6, length=PARSEC)
    assert s.from_seconds(s.to_seconds(3.0)) == pytest.approx(3.0, rel=1e-15)
    assert s.from_years(s.to_years(0.25)) == pytest.approx(0.25, rel=1e-15)
    assert s.from_metres(s.to_metres(7.0)) == pytest.approx(7.0, rel=1e-15)
    assert s.from_metres_per_second(s.to_metres_per_second(2.0)) == pytest.approx(2.0, rel=1e-15)
    assert s.to_years(1.0) == pytest.approx(s.to_seconds(1.0) / YEAR, rel=1e-15)
    t = np.array([0.0, 1.0, 2.0])
    out = s.to_seconds(t)
    assert isinstance(out, np.ndarray) and out.shape == (3,)
    np.testing.assert_allclose(out, t * s.time, rtol=1e-15)
    assert isinstance(s.to_metres(1), float)
    # velocity unit times time unit is the length unit
    assert s.velocity * s.time == pytest.approx(s.length, rel=1e-15)
    # more mass, shorter time: T scales as M^(-1/2)
    assert Scale(4.0).time == pytest.approx(Scale(1.0).time / 2, rel=1e-15)


def test_scale_equality_and_repr():
    assert Scale(1.0, AU) == Scale(1, AU)
    assert Scale(1.0, AU) != Scale(2.0, AU)
    assert "Scale(" in repr(Scale())
    assert units.Scale().length == PARSEC  # default length unit


@pytest.mark.parametrize(
    "kwargs, exc, name",
    [
        ({"mass": 0.0}, ValueError, "mass"),
        ({"mass": -1.0}, ValueError, "mass"),
        ({"mass": float("nan")}, ValueError, "mass"),
        ({"length": float("inf")}, ValueError, "length"),
        ({"length": 0}, ValueError, "length"),
        ({"mass": "1"}, TypeError, "mass"),
        ({"length": True}, TypeError, "length"),
    ],
)
def test_bad_scale(kwargs, exc, name):
    with pytest.raises(exc, match=name):
        Scale(**kwargs)


def test_bad_conversion_input():
    s = Scale()
    with pytest.raises(TypeError, match="^t "):
        s.to_seconds("soon")
    with pytest.raises(ValueError, match="digits"):
        s.decimal("c", 0)
    with pytest.raises(ValueError, match="name"):
        s.decimal("charm")


def test_astropy_is_not_imported_for_plain_numbers():
    code = (
        "import sys; from loschmidt.units import Scale; s = Scale(1.0); s.to_seconds(1.0); "
        "s.from_metres(2.0); assert 'astropy' not in sys.modules, 'astropy imported'"
    )
    subprocess.run([sys.executable, "-c", code], check=True, timeout=120)


def test_astropy_quantities():
    u = pytest.importorskip("astropy.units")
    s = Scale(mass=1 * u.M_sun, length=1 * u.pc)
    assert s.time == pytest.approx(Scale(1.0, PARSEC).time, rel=1e-12)
    assert s.from_seconds(s.time * u.s) == pytest.approx(1.0, rel=1e-15)
    assert s.from_metres(1 * u.pc) == pytest.approx(1.0, rel=1e-12)
    assert s.from_metres_per_second(s.velocity * u.m / u.s) == pytest.approx(1.0, rel=1e-15)
    with pytest.raises(ValueError, match="length"):
        Scale(length=1 * u.s)
    with pytest.raises(TypeError, match="^t "):
        s.to_seconds(1 * u.s)
