"""Environment kinds (tg_atmosphere) against published tables, reference libraries and closed forms.

Sources are named beside each check. Status codes as in /work/shared/references.md: S seen in a stored copy
of the source, L in an installed reference library, C computed from the formula.
"""

from __future__ import annotations

import math
from decimal import Decimal
from pathlib import Path

import numpy as np
import pytest
from ambiance import Atmosphere
from fluids.atmosphere import ATMOSPHERE_1976

from thrustgraph.base.xp import scalar_ops
from thrustgraph import integrate, parse_model
from thrustgraph.cli import main as cli_main
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import parse_params
from thrustgraph.models.plugins import environment_kinds, get_plugin_manager
from conftest import model_from_toml

from tg_atmosphere.standard1976 import LAYERS, geometric_altitude, geopotential_altitude

G0 = 9.80665          # standard gravity, exact (3rd CGPM 1901)
R0 = 6356766.0        # 1976 standard effective earth radius (S: crnslab.org; references.md section 5)
REPO = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def kinds():
    """The environment kinds as the plugin manager finds them (through the entry points)."""
    return environment_kinds(get_plugin_manager())


def build(kinds, kind, **raw):
    cls = kinds[kind]
    p = parse_params(cls.parameters, raw, where="environment.medium", params_class=cls.params_class())
    cls.check(p, "environment.medium")
    return cls.build(p, scalar_ops)


def half_unit(printed: str) -> float:
    """Half a unit in the last printed digit of a table value: the table's own rounding."""
    exp = Decimal(printed).as_tuple().exponent
    return 0.5 * 10.0 ** exp


# ---------------------------------------------------------------------------
# US Standard Atmosphere 1976: published table values (references.md section 5, entries marked S or L),
# compared to the printed digits (tolerance: half a unit in the last printed digit).
# ---------------------------------------------------------------------------

GEOMETRIC_TABLE = [
    # Z (m), T (K), p (Pa), rho (kg/m^3), source
    (0.0, "288.150", "101325.0", "1.22500", "L fluids/ambiance + S scipp.ucsc.edu 1976 page (1.225, 101325)"),
    (1000.0, "281.651", "89876.3", "1.11166", "L fluids and ambiance, references.md section 5"),
    (5000.0, "255.676", "54048.29", "0.736428", "L fluids ATMOSPHERE_1976 docstring (P = 54048.286, rho = 0.736428)"),
    (11000.0, "216.774", "22699.96", "0.364802", "L fluids and ambiance, references.md section 5 (geometric 11 km)"),
    # references.md prints rho = 0.0889100 here; fluids (L) and the chained value give 0.08890992, so the last
    # printed digit is one unit high: checked to five figures.
    (20000.0, "216.650", "5529.31", "0.088910", "L fluids and ambiance, references.md section 5"),
    (25000.0, "221.552", "2549.22", "0.0400839", "L fluids, references.md sections 3 and 5"),
]

GEOPOTENTIAL_TABLE = [
    # H (m), T (K), p (Pa), rho (kg/m^3), source
    (11000.0, "216.650", "22632.06", "0.363918", "S av8n.com ISA table (22632.1 Pa, 0.363918); poliastro COESA76 docs"),
    (20000.0, "216.650", "5474.89", "0.088035", "S av8n.com ISA table; poliastro COESA76 docs (54.748 mbar)"),
    # Layer bases from the stored av8n.com/physics/altimetry.htm table "The Standard Atmosphere" (S; its
    # heights are geopotential; not yet listed in references.md):
    (32000.0, "228.65", "868.019", "0.013225", "S av8n.com ISA table, layer 3 base"),
    (47000.0, "270.65", "110.906", "0.001428", "S av8n.com ISA table, layer 4 base"),
    (51000.0, "270.65", "66.9389", "0.000862", "S av8n.com ISA table, layer 5 base"),
    (71000.0, "214.65", "3.95642", "0.000064", "S av8n.com ISA table, layer 6 base"),
    (80000.0, "196.65", "0.88628", "0.000016", "S av8n.com ISA table, mesopause"),
]


@pytest.mark.parametrize("Z, T, p, rho, source", GEOMETRIC_TABLE, ids=[f"Z={r[0]:g}" for r in GEOMETRIC_TABLE])
def test_standard_atmosphere_geometric_table_values(kinds, Z, T, p, rho, source):
    air = build(kinds, "standard-atmosphere-1976", altitude_type="geometric")
    r, pa, Ta, *_ = air(Z, 0.0)
    assert abs(Ta - float(T)) <= half_unit(T), source
    assert abs(pa - float(p)) <= half_unit(p), source
    assert abs(r - float(rho)) <= half_unit(rho), source


@pytest.mark.parametrize("H, T, p, rho, source", GEOPOTENTIAL_TABLE, ids=[f"H={r[0]:g}" for r in GEOPOTENTIAL_TABLE])
def test_standard_atmosphere_geopotential_table_values(kinds, H, T, p, rho, source):
    air = build(kinds, "standard-atmosphere-1976", altitude_type="geopotential")
    r, pa, Ta, *_ = air(H, 0.0)
    assert abs(Ta - float(T)) <= half_unit(T), source
    assert abs(pa - float(p)) <= half_unit(p), source
    assert abs(r - float(rho)) <= half_unit(rho), source


def test_pressure_ratio_at_25_km_matches_sutton_appendix():
    # Sutton & Biblarz, Rocket Propulsion Elements 7th ed., Appendix 2: p/p_SL = 0.025158 at 25 km (S: stored
    # reproduction; references.md section 3). The chained value is 0.0251589: the printed figure looks
    # truncated, not rounded, so the tolerance is one unit in its last digit.
    from tg_atmosphere import atmosphere_1976
    _, p, _ = atmosphere_1976(geopotential_altitude(25000.0))
    assert abs(p / 101325.0 - 0.025158) <= 2 * half_unit("0.025158")


def test_layer_base_pressures_are_chained_from_the_defining_constants():
    # The standard's layer-base pressures (NOAA/NASA/USAF 1976, Table 4; the six-figure values printed on the
    # stored av8n.com table, S): 22632.1, 5474.89, 868.019, 110.906, 66.9389, 3.95642 Pa.
    printed = ["101325", "22632.1", "5474.89", "868.019", "110.906", "66.9389", "3.95642"]
    for (Hb, L, Tb, pb), text in zip(LAYERS, printed):
        assert abs(pb - float(text)) <= half_unit(text), Hb


LIBRARY_ALTITUDES = [0.0, 1000.0, 5000.0, 11000.0, 20000.0, 25000.0, 32000.0, 47000.0, 51000.0, 71000.0, 84000.0]


@pytest.mark.parametrize("Z", LIBRARY_ALTITUDES)
def test_standard_atmosphere_against_fluids(kinds, Z):
    # fluids.atmosphere.ATMOSPHERE_1976 (Caleb Bell, fluids 1.x; implements the 1976 standard, valid to 86 km),
    # geometric altitude. Agreement 1e-5 relative (references.md: library values).
    air = build(kinds, "standard-atmosphere-1976")
    r, pa, Ta, *_ = air(Z, 0.0)
    ref = ATMOSPHERE_1976(Z)
    assert Ta == pytest.approx(ref.T, rel=1e-5)
    assert pa == pytest.approx(ref.P, rel=1e-5)
    assert r == pytest.approx(ref.rho, rel=1e-5)


@pytest.mark.parametrize("Z", [z for z in LIBRARY_ALTITUDES if z <= 81000.0])
def test_standard_atmosphere_against_ambiance(kinds, Z):
    # ambiance.Atmosphere (ambiance 1.3; ICAO Standard Atmosphere 1993, Doc 7488/3, identical to US 1976 in this
    # range; it stops at 81.02 km geometric). Its layer-base pressures are the ICAO values rounded to six
    # figures (e.g. 3.95639 Pa at 71 km), so it differs from the chained values by up to 9e-6: tolerance 1e-5.
    air = build(kinds, "standard-atmosphere-1976")
    r, pa, Ta, *_ = air(Z, 0.0)
    ref = Atmosphere(Z)
    assert Ta == pytest.approx(float(ref.temperature[0]), rel=1e-5)
    assert pa == pytest.approx(float(ref.pressure[0]), rel=1e-5)
    assert r == pytest.approx(float(ref.density[0]), rel=1e-5)


def test_geopotential_11_km_against_fluids(kinds):
    # fluids ATMOSPHERE_1976 at the geometric altitude of geopotential 11 km (11019.07 m), 1e-5 relative.
    air = build(kinds, "standard-atmosphere-1976", altitude_type="geopotential")
    r, pa, Ta, *_ = air(11000.0, 0.0)
    ref = ATMOSPHERE_1976(geometric_altitude(11000.0))
    assert (Ta, pa, r) == pytest.approx((ref.T, ref.P, ref.rho), rel=1e-5)


def test_geometric_and_geopotential_11_km_differ_by_0_3_percent(kinds):
    # references.md section 5, "Pitfall": 22700 Pa at geometric 11 km against 22632 Pa at geopotential 11 km.
    geo = build(kinds, "standard-atmosphere-1976", altitude_type="geometric")(11000.0, 0.0)[1]
    pot = build(kinds, "standard-atmosphere-1976", altitude_type="geopotential")(11000.0, 0.0)[1]
    assert geo / pot - 1.0 == pytest.approx(22699.96 / 22632.06 - 1.0, abs=2e-6)
    assert 0.0029 < geo / pot - 1.0 < 0.0031


def test_geopotential_conversion_closed_form():
    # H = r0 Z / (r0 + Z) (1976 standard; S: crnslab.org, references.md section 5): H(11019.07 m) = 11000 m.
    assert geopotential_altitude(11019.07) == pytest.approx(11000.0, abs=0.01)
    for Z in (0.0, 1234.5, 50000.0, 86000.0):
        assert geopotential_altitude(Z) == pytest.approx(R0 * Z / (R0 + Z), rel=1e-15)
        assert geometric_altitude(geopotential_altitude(Z)) == pytest.approx(Z, abs=1e-8)


@pytest.mark.parametrize("altitude_type", ["geometric", "geopotential"])
def test_datum_altitude_shifts_the_model_height(kinds, altitude_type):
    # z is measured from the launch datum: datum 1400 m plus z 3600 m reads the standard at 5000 m.
    shifted = build(kinds, "standard-atmosphere-1976", altitude_type=altitude_type, datum_altitude="1400 m")
    at_sea = build(kinds, "standard-atmosphere-1976", altitude_type=altitude_type)
    assert shifted(3600.0, 0.0) == pytest.approx(at_sea(5000.0, 0.0), rel=1e-13)
    assert shifted(0.0, 0.0) == pytest.approx(at_sea(1400.0, 0.0), rel=1e-13)


def test_hydrostatic_equation_holds_with_inverse_square_gravity(kinds):
    # The standard is the integral of dp/dZ = -rho g(Z) with g = g0 (r0/(r0+Z))^2 (its defining hydrostatic
    # assumption; S: the crnslab.org and scipp.ucsc.edu pages give r0 and g0). Central differences, h = 0.5 m,
    # inside each layer (the pressure is smooth there).
    air = build(kinds, "standard-atmosphere-1976")
    gk = kinds["inverse-square-gravity"]
    gravity = gk.build(parse_params(gk.parameters, {}, where="environment.gravity", params_class=gk.params_class()), scalar_ops)
    h = 0.5
    for Z in (500.0, 8000.0, 15000.0, 26000.0, 40000.0, 49000.0, 60000.0, 78000.0):
        dpdz = (air(Z + h, 0.0)[1] - air(Z - h, 0.0)[1]) / (2 * h)
        assert dpdz == pytest.approx(-air(Z, 0.0)[0] * gravity(Z), rel=1e-7), Z


# ---------------------------------------------------------------------------
# Outside 0..86 km
# ---------------------------------------------------------------------------

def test_extrapolation_above_86_km_is_isothermal_and_continuous(kinds):
    # Stated behaviour (tg_atmosphere.standard1976): above H = 84 852 m the top temperature is held and the
    # pressure falls as in an isothermal layer, p = p_top exp(-g0 M0 dH / (R* T_top)).
    air = build(kinds, "standard-atmosphere-1976", altitude_type="geopotential")
    Htop = 84852.0
    below, above = air(Htop - 1e-6, 0.0), air(Htop + 1e-6, 0.0)
    assert above[:3] == pytest.approx(below[:3], rel=1e-9)
    T_top, p_top = LAYERS[-1][2], LAYERS[-1][3]
    assert T_top == pytest.approx(214.65 - 2.0 * 13.852, abs=1e-9)   # 186.946 K: layer 6 run to its top (C)
    r, p, T, *_ = air(Htop + 5000.0, 0.0)
    assert T == T_top
    assert p == pytest.approx(p_top * math.exp(-G0 * 28.9644 * 5000.0 / (8314.32 * T_top)), rel=1e-13)


def test_extrapolation_below_sea_level_continues_the_troposphere(kinds):
    # Stated behaviour: below 0 m the layer-0 law continues, T = 288.15 - 0.0065 H; held below H = -5000 m.
    air = build(kinds, "standard-atmosphere-1976", altitude_type="geopotential")
    assert air(-1000.0, 0.0)[2] == pytest.approx(294.65, abs=1e-12)
    assert air(-1000.0, 0.0)[1] == pytest.approx(101325.0 * (288.15 / 294.65) ** (G0 * 28.9644 / (8314.32 * -0.0065)),
                                                  rel=1e-13)
    assert air(-9000.0, 0.0) == air(-5000.0, 0.0)
    # ambiance goes down to -5 km with the same law (L):
    assert air(-4000.0, 0.0)[1] == pytest.approx(float(Atmosphere(geometric_altitude(-4000.0)).pressure[0]), rel=1e-5)


ATMOSPHERE_DROP = """
    [launch]
    mount = "free"
    altitude = "{alt}"
    speed = "{speed}"
    elevation = "90 deg"
    [run]
    end_time = "{end}"
    [environment.medium]
    kind = "standard-atmosphere-1976"
    altitude_type = "{scale}"
    datum_altitude = "{datum}"
    {extra}
    [components.body]
    kind = "airframe"
    dry_mass = "1 kg"
    reference_diameter = "100 mm"
    drag_coefficient = 0.5
"""


@pytest.mark.parametrize("datum, alt, scale, top", [
    ("0 m", "90 km", "geometric", "86000"),
    ("80 km", "6.5 km", "geometric", "86000"),
    ("0 m", "85 km", "geopotential", "84852.05"),
    ("500 m", "-600 m", "geometric", "86000"),
])
def test_launch_point_outside_the_standard_is_refused(datum, alt, scale, top):
    m = model_from_toml(ATMOSPHERE_DROP.format(alt=alt, speed="0 m/s", end="10 s", scale=scale, datum=datum, extra=""))
    with pytest.raises(ModelError) as exc:
        parse_model(m)
    msg = str(exc.value)
    assert "launch.altitude" in msg and "environment.medium.datum_altitude" in msg
    assert f"from 0 m to {top} m" in msg
    assert "to fix it, change launch.altitude or environment.medium.datum_altitude" in msg


@pytest.mark.parametrize("datum, scale", [("-10 m", "geometric"), ("87 km", "geometric"), ("84.86 km", "geopotential")])
def test_datum_outside_the_standard_is_refused(kinds, datum, scale):
    with pytest.raises(ModelError) as exc:
        build(kinds, "standard-atmosphere-1976", datum_altitude=datum, altitude_type=scale)
    msg = str(exc.value)
    assert msg.startswith("environment.medium.datum_altitude:")
    assert "outside the 1976 standard atmosphere" in msg and "Fix: give the launch site's height" in msg


def test_cli_refuses_a_launch_point_above_86_km_with_status_2(tmp_path, capsys):
    path = tmp_path / "too-high.toml"
    path.write_text('format = "thrustgraph-model"\nversion = 1\nname = "too high"\n'
                    + ATMOSPHERE_DROP.format(alt="90 km", speed="0 m/s", end="10 s", scale="geometric", datum="0 m", extra=""))
    assert cli_main(["run", str(path)]) == 2
    err = capsys.readouterr().err
    assert "launch.altitude" in err and "outside the 1976 standard atmosphere" in err


def test_flight_through_the_top_of_the_standard_continues_isothermally():
    # A body thrown up from 85.5 km (datum) passes 86 km: the flight runs on in the stated extrapolation.
    m = model_from_toml(ATMOSPHERE_DROP.format(alt="0 m", speed="150 m/s", end="40 s", scale="geometric",
                                               datum="85.5 km", extra=""))
    r = integrate(m)
    assert r.success
    assert r.summary["apogee"] > 1000.0          # above 86.5 km geometric
    top = np.argmax(r.signals["altitude"])
    assert r.signals["ambient_temperature"][top] == pytest.approx(LAYERS[-1][2], rel=1e-12)


def test_gravity_datum_must_match_the_atmosphere_datum():
    m = model_from_toml(ATMOSPHERE_DROP.format(alt="0 m", speed="0 m/s", end="10 s", scale="geometric",
                                               datum="1400 m", extra="") + """
    [environment.gravity]
    kind = "inverse-square-gravity"
    datum_altitude = "0 m"
    """)
    with pytest.raises(ModelError) as exc:
        parse_model(m)
    msg = str(exc.value)
    assert "environment.gravity.datum_altitude" in msg and 'to fix it give environment.gravity.datum_altitude = "1400 m"' in msg


# ---------------------------------------------------------------------------
# Wind profile
# ---------------------------------------------------------------------------

def test_power_law_wind_profile(kinds):
    # w(z) = w_ref (z / z_ref)^alpha, alpha = 1/7 (common practice, no single source), toward azimuth 30 deg.
    air = build(kinds, "standard-atmosphere-1976", wind_speed="6 m/s", wind_azimuth="30 deg",
                wind_reference_height="10 m", wind_ceiling="500 m")
    az = math.radians(30.0)
    for z in (0.5, 10.0, 40.0, 160.0, 499.0):
        w = 6.0 * (z / 10.0) ** (1.0 / 7.0)
        assert air(z, 0.0)[3:] == pytest.approx((w * math.cos(az), w * math.sin(az), 0.0), rel=1e-13)
    assert air(2000.0, 0.0)[3:] == air(500.0, 0.0)[3:]          # held above the ceiling
    assert air(-1.0, 0.0)[3:] == (0.0, 0.0, 0.0)                # calm below the datum
    assert air(0.0, 0.0)[3:] == (0.0, 0.0, 0.0)


def test_wind_ceiling_below_the_reference_height_is_refused(kinds):
    with pytest.raises(ModelError) as exc:
        build(kinds, "standard-atmosphere-1976", wind_speed="5 m/s", wind_reference_height="10 m",
              wind_ceiling="5 m")
    msg = str(exc.value)
    assert msg.startswith("environment.medium.wind_ceiling: 5 m is below wind_reference_height (10 m)")
    assert "Fix: raise wind_ceiling above the reference height" in msg


def test_constant_wind_when_the_exponent_is_zero(kinds):
    air = build(kinds, "standard-atmosphere-1976", wind_speed="4 m/s", wind_azimuth="90 deg", wind_exponent=0)
    for z in (-3.0, 0.0, 5.0, 3000.0):
        assert air(z, 0.0)[3:] == pytest.approx((0.0, 4.0, 0.0), abs=1e-15)


def test_wind_drifts_a_falling_body_downwind():
    # A drag body falling from 300 m in a steady wind toward +x drifts toward +x (and not sideways).
    m = model_from_toml(ATMOSPHERE_DROP.format(alt="300 m", speed="0 m/s", end="60 s", scale="geometric",
                                               datum="0 m", extra='wind_speed = "5 m/s"\n    wind_exponent = 0'))
    r = integrate(m)
    x, y = r.signals["position"][-1, 0], r.signals["position"][-1, 1]
    t_fall = r.t[-1]
    assert 1.0 < x < 5.0 * t_fall and abs(y) < 1e-9
    # the horizontal velocity never exceeds the wind's (drag pulls it toward the wind, from below)
    assert np.all(r.signals["velocity"][:, 0] <= 5.0 + 1e-9)


# ---------------------------------------------------------------------------
# Still water and inverse-square gravity: closed forms
# ---------------------------------------------------------------------------

def test_still_water_hydrostatic_pressure(kinds):
    # p = p_s + rho g depth (hydrostatics of an incompressible liquid at rest, e.g. Munson, Young & Okiishi,
    # Fundamentals of Fluid Mechanics, ch. 2; from memory). rho = 998.2 kg/m^3 at 20 C (references.md section 8).
    water = build(kinds, "still-water", surface_altitude="2 m", surface_pressure="101325 Pa")
    for depth in (0.0, 0.25, 1.0, 10.0, 100.0):
        rho, p, T, *_ = water(2.0 - depth, 0.0)
        assert rho == 998.2
        assert p == pytest.approx(101325.0 + 998.2 * G0 * depth, rel=1e-14)
        assert T == pytest.approx(293.15, rel=1e-14)
    assert water(5.0, 0.0)[1] == 101325.0        # above the surface: the surface pressure
    # 10 m of fresh water adds 0.9789 bar (computed)
    assert water(-8.0, 0.0)[1] - 101325.0 == pytest.approx(97889.98, abs=0.01)


def test_still_water_current_and_gravity_parameter(kinds):
    water = build(kinds, "still-water", density="1025 kg/m^3", g="9.81 m/s^2", current_x="0.5 m/s",
                  current_y="-0.2 m/s")
    rho, p, T, cx, cy, cz = water(-3.0, 0.0)
    assert (rho, cx, cy, cz) == (1025.0, 0.5, -0.2, 0.0)
    assert p == pytest.approx(101325.0 + 1025.0 * 9.81 * 3.0, rel=1e-14)


def test_inverse_square_gravity_closed_form(kinds):
    # g(z) = g0 (r0 / (r0 + z_datum + z))^2, r0 = 6356766 m (1976 standard; references.md section 5).
    cls = kinds["inverse-square-gravity"]
    g = cls.build(parse_params(cls.parameters, {}, where="environment.gravity", params_class=cls.params_class()), scalar_ops)
    assert g(0.0) == G0
    assert g(R0) == pytest.approx(G0 / 4.0, rel=1e-15)         # twice the radius: a quarter
    for z in (1000.0, 11000.0, 86000.0, 400e3):
        assert g(z) == pytest.approx(G0 * (R0 / (R0 + z)) ** 2, rel=1e-15)
    g2 = cls.build(parse_params(cls.parameters, {"datum_altitude": "1400 m", "g0": "9.8 m/s^2"},
                                where="environment.gravity", params_class=cls.params_class()), scalar_ops)
    assert g2(600.0) == pytest.approx(9.8 * (R0 / (R0 + 2000.0)) ** 2, rel=1e-15)
    # at 86 km the 1976 standard lists g = 9.5466 m/s^2 (fluids ATMOSPHERE_1976(86e3).g, L)
    assert g(86000.0) == pytest.approx(ATMOSPHERE_1976(86000.0).g, rel=1e-9)


def test_inverse_square_gravity_free_fall_energy():
    # A drag-free body dropped from 100 km in inverse-square gravity hits the datum with
    # v^2 = 2 g0 r0^2 (1/r0 - 1/(r0 + h)) (energy conservation in a 1/r potential; any mechanics text).
    m = model_from_toml("""
        [launch]
        mount = "free"
        altitude = "100 km"
        [run]
        end_time = "400 s"
        [environment.medium]
        kind = "vacuum"
        [environment.gravity]
        kind = "inverse-square-gravity"
        [components.body]
        kind = "airframe"
        dry_mass = "1 kg"
    """)
    r = integrate(m)
    h = 100e3
    v = math.sqrt(2 * G0 * R0 ** 2 * (1 / R0 - 1 / (R0 + h)))
    assert r.message == "ground impact"
    assert r.summary["impact_speed"] == pytest.approx(v, rel=1e-8)


# ---------------------------------------------------------------------------
# The demo model
# ---------------------------------------------------------------------------

def test_demo_model_runs_from_the_command_line(capsys):
    path = REPO / "models" / "small-rocket-standard-atmosphere.toml"
    assert cli_main(["run", str(path)]) == 0
    out = capsys.readouterr().out
    assert "apogee" in out and "Cautions" in out and "NFPA 1122" in out


# ---------------------------------------------------------------------------
# still air: density from pressure and temperature (ideal gas), humidity, and a given density checked
# ---------------------------------------------------------------------------

R_1976 = 8314.32 / 28.9644   # J/(kg K): R* / M0 of the US Standard Atmosphere 1976 (NOAA/NASA/USAF 1976)


@pytest.mark.parametrize("p, T", [(101325.0, 288.15), (101325.0, 308.15), (84000.0, 268.15), (1e5, 250.0),
                                  (1200.0, 180.0)])
def test_still_air_density_is_the_ideal_gas_law(kinds, p, T):
    # rho = p / (R T) with the 1976 standard's gas constant (closed form, the ideal-gas law).
    rho, pa, Ta, *_ = build(kinds, "still-air", pressure=f"{p!r} Pa", temperature=f"{T!r} K")(0.0, 0.0)
    assert (pa, Ta) == (p, T)
    assert rho == pytest.approx(p / (R_1976 * T), rel=1e-13)


def test_still_air_defaults_give_the_1976_sea_level_density(kinds):
    # NOAA/NASA/USAF, U.S. Standard Atmosphere 1976, Table I: 101325 Pa, 288.150 K, 1.2250 kg/m^3.
    rho, *_ = build(kinds, "still-air")(0.0, 0.0)
    assert abs(rho - 1.2250) <= half_unit("1.2250")


def test_a_warm_day_is_lighter(kinds):
    # The complaint this answers: 35 degC used to keep 1.225 kg/m^3. Ideal gas: 1.225 * 288.15 / 308.15.
    rho, *_ = build(kinds, "still-air", temperature="35 degC")(0.0, 0.0)
    assert rho == pytest.approx(1.2249992 * 288.15 / 308.15, rel=1e-6)
    assert abs(rho - 1.1455) < 5e-5


@pytest.mark.parametrize("Z, T, p, rho, source", GEOMETRIC_TABLE, ids=[f"Z={r[0]:g}" for r in GEOMETRIC_TABLE])
def test_still_air_at_the_1976_table_pressure_and_temperature_has_its_density(kinds, Z, T, p, rho, source):
    # U.S. Standard Atmosphere 1976 (NOAA/NASA/USAF), Table I, the rows above: still air given the table's
    # pressure and temperature has the table's density. Tolerance: half a unit in the density's last printed
    # digit plus what the rounding of the printed p and T moves it.
    got, *_ = build(kinds, "still-air", pressure=f"{p} Pa", temperature=f"{T} K")(0.0, 0.0)
    r = float(rho)
    tol = half_unit(rho) + r * (half_unit(p) / float(p) + half_unit(T) / float(T))
    assert abs(got - r) <= tol, source


@pytest.mark.parametrize("Z", [0.0, 1000.0, 5000.0, 11000.0, 20000.0, 32000.0, 47000.0, 71000.0])
def test_still_air_agrees_with_ambiance_at_altitude(kinds, Z):
    # L: the ambiance package (its 1976 standard, R = 287.05287 J/(kg K)) at geometric altitude Z.
    a = Atmosphere(Z)
    p, T = float(a.pressure[0]), float(a.temperature[0])
    got, *_ = build(kinds, "still-air", pressure=f"{p!r} Pa", temperature=f"{T!r} K")(0.0, 0.0)
    assert got == pytest.approx(float(a.density[0]), rel=1e-6)


@pytest.mark.parametrize("t_c", [0.01, 5.0, 10.0, 20.0, 35.0, 50.0])
def test_buck_saturation_vapour_pressure_against_iapws95(t_c):
    # L: CoolProp's water (IAPWS-95) saturation pressure, from the triple point (0.01 degC; the saturation line of
    # IAPWS-95 starts there) to 50 degC; Buck's fit over water (J. Appl. Meteorol. 20, 1981; the 1996
    # coefficients) stays within 0.1 % of it.
    CP = pytest.importorskip("CoolProp.CoolProp")
    from tg_atmosphere.air import saturation_vapour_pressure
    T = t_c + 273.15
    assert saturation_vapour_pressure(T) == pytest.approx(CP.PropsSI("P", "T", T, "Q", 0, "Water"), rel=1e-3)


@pytest.mark.parametrize("t_c, rh", [(0.0, 0.5), (15.0, 0.0), (20.0, 0.5), (20.0, 1.0), (35.0, 0.8), (45.0, 1.0)])
def test_humid_air_density_against_coolprop(kinds, t_c, rh):
    # L: CoolProp HAPropsSI (ASHRAE RP-1485 humid air, real-gas mixing): 1 / Vha is the humid-air density. The
    # ideal mixture without enhancement factor and compressibility is expected within 0.1 %.
    HA = pytest.importorskip("CoolProp.HumidAirProp")
    T = t_c + 273.15
    got, *_ = build(kinds, "still-air", temperature=f"{T!r} K", relative_humidity=rh)(0.0, 0.0)
    assert got == pytest.approx(1.0 / HA.HAPropsSI("Vha", "T", T, "P", 101325.0, "R", rh), rel=1e-3)
    if rh > 0:
        dry, *_ = build(kinds, "still-air", temperature=f"{T!r} K")(0.0, 0.0)
        assert got < dry


@pytest.mark.parametrize("raw, parts", [
    ({"temperature": "35 degC", "density": "1.225 kg/m^3"},
     ["environment.medium.density", "1.225 kg/m^3 does not go with", "35 degC", "1.1455 kg/m^3", "1 % allowed",
      "leave density out"]),
    ({"pressure": "90 kPa", "density": "1.225 kg/m^3"}, ["environment.medium.density", "90000 Pa"]),
    ({"relative_humidity": 0.5, "temperature": "80 degC"}, ["environment.medium.relative_humidity", "-40 degC",
                                                             "80 degC"]),
    ({"relative_humidity": 1.0, "temperature": "45 degC", "pressure": "5 kPa"},
     ["environment.medium.relative_humidity", "more than the air's pressure"]),
])
def test_inconsistent_air_is_refused(kinds, raw, parts):
    with pytest.raises(ModelError) as err:
        build(kinds, "still-air", **raw)
    for part in parts:
        assert part in str(err.value), str(err.value)


def test_a_given_density_within_one_percent_is_used_as_given(kinds):
    rho, *_ = build(kinds, "still-air", density="1.22 kg/m^3")(0.0, 0.0)       # 0.4 % below 1.2250
    assert rho == 1.22
    with pytest.raises(ModelError, match="1.2 kg/m\\^3 does not go with"):   # 2.0 % below
        build(kinds, "still-air", density="1.2 kg/m^3")


def test_the_flight_and_check_see_the_derived_density(tmp_path):
    text = (REPO / "models" / "bottle-rocket.toml").read_text().replace('\ntemperature = "15 degC"',
                                                                        '\ntemperature = "35 degC"')
    from thrustgraph.models.modelfile import loads_model
    parsed = parse_model(loads_model(text, source="warm.toml"))
    assert parsed.ambient.density == pytest.approx(101325.0 / (R_1976 * 308.15), rel=1e-12)
    path = tmp_path / "warm.toml"
    path.write_text(text)
    import contextlib
    import io
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert cli_main(["check", str(path)]) == 0
    assert "35 degC, 1.145 kg/m^3" in out.getvalue()   # 1.14548


def test_a_study_cannot_vary_a_density_the_model_derives():
    from thrustgraph.models.designs import resolve
    from thrustgraph.models.modelfile import load_model
    parsed = parse_model(load_model(REPO / "models" / "bottle-rocket.toml"))
    with pytest.raises(ModelError, match="is left out of the model.*vary what it is derived from"):
        resolve(parsed, "environment.medium.density")
    assert resolve(parsed, "environment.medium.temperature").nominal == 288.15


@pytest.mark.parametrize("flights", ["single", "ensemble"])
def test_a_temperature_sweep_with_a_pinned_density_screens_the_designs_it_contradicts(flights):
    # The model pins density = 1.225 kg/m^3; a study varying the temperature refuses (screens) the designs whose
    # temperature that density no longer fits (beyond 1 %), on both paths of a study.
    import numpy as np
    from thrustgraph.models.designs import resolve
    from thrustgraph.models.modelfile import load_model
    from thrustgraph.studies.studies import evaluate
    m = load_model(REPO / "models" / "bottle-rocket.toml").set("environment.medium.density", "1.225 kg/m^3")
    parsed = parse_model(m)
    p = resolve(parsed, "environment.medium.temperature")
    t = evaluate(m, [p], np.array([[288.15], [308.15]]), ["apogee"], parsed=parsed, engine="serial",
                 flights=flights, quiet=True)
    assert t.status.tolist() == ["ok", "screened"]
    assert "does not go with" in t.notes[1]
