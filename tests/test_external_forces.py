"""External-force kinds (tg_drag) against closed forms: drag tables, hull resistance, buoyancy, terminal velocity,
drag-free projectile range and apogee; and their bad-input messages.

Sources are named beside each check.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from thrustgraph.base.xp import scalar_ops
from thrustgraph import integrate, parse_model
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import parse_params
from thrustgraph.models.plugins import component_kinds, get_plugin_manager
from conftest import model_from_toml

G0 = 9.80665                     # standard gravity, exact (3rd CGPM 1901)
R_1976 = 8314.32 / 28.9644       # 1976 standard R*/M0, J/(kg K) (references.md section 5)
RHO_W = 998.2                    # water at 20 C (references.md section 8)


@pytest.fixture(scope="module")
def kinds():
    """The component kinds as the plugin manager finds them (through the entry points)."""
    return component_kinds(get_plugin_manager())


def body(kinds, kind, **raw):
    cls = kinds[kind]
    p = parse_params(cls.parameters, raw, where="components.body", params_class=cls.params_class())
    cls.check(p, "components.body")
    return cls.build_body(p, scalar_ops)


def air_tuple(rho, T, v):
    """The ``air`` argument of BodyFns.force: (rho, p_a, T_a, vx, vy, vz, speed)."""
    return (rho, 101325.0, T, v[0], v[1], v[2], math.sqrt(v[0] ** 2 + v[1] ** 2 + v[2] ** 2))


MACH_ROWS = [[0.0, 0.40], [0.8, 0.45], [1.0, 0.70], [1.2, 0.62], [2.0, 0.50]]


# ---------------------------------------------------------------------------
# Drag tables: the force at and between table points
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("mach, cd", [
    (0.0, 0.40), (0.8, 0.45), (1.0, 0.70), (1.2, 0.62), (2.0, 0.50),      # table points
    (0.4, 0.425), (0.9, 0.575), (1.1, 0.66), (1.6, 0.56),                 # midpoints: linear interpolation
    (3.5, 0.50),                                                          # above the table: clamped
])
def test_mach_table_drag_force(kinds, mach, cd):
    # D = -1/2 rho C_D A |v| v, the definition of C_D (NASA Glenn, Beginner's Guide, "The Drag Equation");
    # a = sqrt(gamma R T) (1976 standard's speed of sound; references.md section 5).
    b = body(kinds, "mach-table-airframe", dry_mass="1 kg", reference_diameter="54 mm",
             drag_table={"units": ["", ""], "rows": MACH_ROWS})
    T, rho = 250.0, 0.7
    a = math.sqrt(1.4 * R_1976 * T)
    e = np.array([0.6, -0.0, 0.8])
    v = mach * a * e
    F = b.force(air_tuple(rho, T, v))
    A = math.pi * 0.054 ** 2 / 4
    expected = -0.5 * rho * cd * A * (mach * a) ** 2 * e
    assert F == pytest.approx(tuple(expected), rel=1e-12, abs=1e-15)
    assert b.mass == 1.0


def test_mach_number_uses_the_gas_parameters(kinds):
    # Speed of sound a = sqrt(gamma R T): for helium-like gamma = 5/3, R = 2077 J/(kg K) at 300 K, a = 1019.6 m/s.
    b = body(kinds, "mach-table-airframe", dry_mass="1 kg", reference_diameter="100 mm", gas_gamma=5 / 3,
             gas_constant="2077 J/(kg*K)", drag_table={"units": ["", ""], "rows": [[0.0, 0.2], [1.0, 1.2]]})
    a = math.sqrt(5 / 3 * 2077 * 300.0)
    F = b.force(air_tuple(0.16, 300.0, (0.5 * a, 0.0, 0.0)))
    assert F[0] == pytest.approx(-0.5 * 0.16 * 0.7 * math.pi * 0.01 / 4 * (0.5 * a) ** 2, rel=1e-12)


def test_mach_table_in_vacuum_gives_no_drag(kinds):
    b = body(kinds, "mach-table-airframe", dry_mass="1 kg", reference_diameter="54 mm",
             drag_table={"units": ["", ""], "rows": MACH_ROWS})
    assert b.force((0.0, 0.0, 0.0, 100.0, 0.0, 0.0, 100.0)) == (0.0, 0.0, 0.0)


@pytest.mark.parametrize("speed, cd", [(0.0, 0.9), (5.0, 0.9), (20.0, 0.6), (12.5, 0.75), (2.0, 0.9), (80.0, 0.5),
                                       (35.0, 0.55)])
def test_speed_table_drag_force(kinds, speed, cd):
    # Same drag equation; C_D from a table against speed (rows at 5, 20, 50 m/s; clamped below 5 and above 50).
    b = body(kinds, "speed-table-airframe", dry_mass="2 kg", reference_diameter="0.2 m",
             drag_table={"units": ["km/h", ""], "rows": [[18.0, 0.9], [72.0, 0.6], [180.0, 0.5]]})
    rho = 1.225
    F = b.force(air_tuple(rho, 288.15, (0.0, 0.0, -speed)))
    assert F[2] == pytest.approx(0.5 * rho * cd * math.pi * 0.01 * speed ** 2, rel=1e-12, abs=1e-15)
    assert F[0] == 0.0 and F[1] == 0.0


# ---------------------------------------------------------------------------
# Boat hull resistance
# ---------------------------------------------------------------------------

HULL_ROWS = [[0.5, 1.0], [1.0, 3.0], [2.0, 12.0], [3.0, 30.0]]


@pytest.mark.parametrize("speed, resistance", [
    (0.5, 1.0), (1.0, 3.0), (2.0, 12.0), (3.0, 30.0),          # table points
    (1.5, 7.5), (2.5, 21.0),                                   # linear between rows
    (0.25, 0.5),                                               # below the first row: linear to 0 at 0 m/s
    (6.0, 120.0),                                              # above the last: R_n (v / v_n)^2
])
def test_hull_resistance_force(kinds, speed, resistance):
    b = body(kinds, "boat-hull", dry_mass="8 kg", resistance_table={"units": ["m/s", "N"], "rows": HULL_ROWS})
    e = (math.cos(0.3), math.sin(0.3))
    F = b.force(air_tuple(RHO_W, 293.15, (speed * e[0], speed * e[1], 0.0)))
    assert F == pytest.approx((-resistance * e[0], -resistance * e[1], 0.0), rel=1e-12)
    assert b.mass == 8.0


def test_hull_resistance_horizontal_or_along_motion(kinds):
    table = {"units": ["m/s", "N"], "rows": [[0.0, 0.0], [2.0, 8.0]]}
    flat = body(kinds, "boat-hull", dry_mass="8 kg", resistance_table=table)
    full = body(kinds, "boat-hull", dry_mass="8 kg", resistance_table=table, acts="along-motion")
    v = (1.2, 0.0, -1.6)                                       # |v| = 2, horizontal 1.2
    assert flat.force(air_tuple(RHO_W, 293.15, v)) == pytest.approx((-4.8, 0.0, 0.0), rel=1e-12)
    assert full.force(air_tuple(RHO_W, 293.15, v)) == pytest.approx((-4.8, 0.0, 6.4), rel=1e-12)
    assert flat.force(air_tuple(RHO_W, 293.15, (0.0, 0.0, 0.0))) == (0.0, 0.0, 0.0)


HULL_MODEL = """
    [launch]
    mount = "free"
    elevation = "0 deg"
    speed = "{v0} m/s"
    [run]
    end_time = "{end} s"
    [environment.medium]
    kind = "still-water"
    current_x = "{current} m/s"
    [environment.gravity]
    kind = "uniform-gravity"
    g = "0 m/s^2"
    [components.hull]
    kind = "boat-hull"
    dry_mass = "{m} kg"
    resistance_table = {{ units = ["m/s", "N"], rows = {rows} }}
"""


def test_hull_coasting_with_linear_resistance():
    # m dv/dt = -k v: v = v0 exp(-k t / m), x = v0 m / k (1 - exp(-k t / m)) (Newton's second law with linear
    # resistance; e.g. Taylor, Classical Mechanics, 2005, section 2.2; from memory). g = 0 stands in for the
    # water-surface support the core does not have yet.
    v0, m, k = 4.0, 5.0, 2.0
    r = integrate(model_from_toml(HULL_MODEL.format(v0=v0, end=6, current=0, m=m, rows="[[0, 0], [10, 20]]")))
    t = r.t
    assert r.signals["velocity"][:, 0] == pytest.approx(v0 * np.exp(-k * t / m), rel=1e-7, abs=1e-9)
    assert r.signals["position"][:, 0] == pytest.approx(v0 * m / k * (1 - np.exp(-k * t / m)), rel=1e-7, abs=1e-9)
    assert np.all(r.signals["position"][:, 2] == 0.0)


def test_hull_coasting_with_quadratic_resistance():
    # R = c v^2 (the table [[0, 0], [1, 3]] extended quadratically above 1 m/s): v = v0 / (1 + c v0 t / m)
    # while v >= 1 m/s (Newton's second law with quadratic drag; e.g. Taylor, Classical Mechanics, section 2.4).
    v0, m, c = 8.0, 5.0, 3.0
    r = integrate(model_from_toml(HULL_MODEL.format(v0=v0, end=1.4, current=0, m=m, rows="[[0, 0], [1, 3]]")))
    assert r.signals["speed"][-1] > 1.0
    assert r.signals["velocity"][:, 0] == pytest.approx(v0 / (1 + c * v0 * r.t / m), rel=1e-7)


def test_hull_in_a_current_is_carried_toward_the_current_speed():
    # Resistance acts on the velocity through the water: a hull at rest in a 1.5 m/s current with R = k v_rel
    # moves as v = c (1 - exp(-k t / m)).
    m, k, c = 5.0, 2.0, 1.5
    r = integrate(model_from_toml(HULL_MODEL.format(v0=0, end=8, current=c, m=m, rows="[[0, 0], [10, 20]]")))
    assert r.signals["velocity"][:, 0] == pytest.approx(c * (1 - np.exp(-k * r.t / m)), rel=1e-7, abs=1e-9)


# ---------------------------------------------------------------------------
# Terminal velocity and the drag-free projectile (flights)
# ---------------------------------------------------------------------------

DROP = """
    [launch]
    mount = "free"
    altitude = "{alt}"
    [run]
    end_time = "{end}"
    [environment.medium]
    kind = "{medium}"
    [components.body]
    {body}
"""


def falling_speed_closed_form(t, g_net, vt):
    """v(t) = v_t tanh(g' t / v_t) for m dv/dt = m g' - c v^2 from rest, v_t = sqrt(m g' / c)
    (quadratic drag; e.g. Taylor, Classical Mechanics, 2005, section 2.4, eq. 2.57; from memory)."""
    return vt * np.tanh(g_net * t / vt)


@pytest.mark.parametrize("airframe", [
    'kind = "airframe"\n    dry_mass = "1 kg"\n    reference_diameter = "100 mm"\n    drag_coefficient = 0.5',
    'kind = "speed-table-airframe"\n    dry_mass = "1 kg"\n    reference_diameter = "100 mm"\n'
    '    drag_table = { units = ["m/s", ""], rows = [[0, 0.5], [100, 0.5]] }',
    'kind = "mach-table-airframe"\n    dry_mass = "1 kg"\n    reference_diameter = "100 mm"\n'
    '    drag_table = { units = ["", ""], rows = [[0, 0.5], [1, 0.5]] }',
], ids=["airframe", "speed-table", "mach-table"])
def test_terminal_velocity_of_a_dropped_body(airframe):
    # v_t = sqrt(2 m g / (rho C_D A)) (references.md; the quadratic-drag terminal speed, any mechanics text),
    # still air at the 1976 sea-level 101325 Pa and 288.15 K (ideal gas, 1.2250 kg/m^3), dropped from rest at
    # 5 km above the datum.
    r = integrate(model_from_toml(DROP.format(alt="5000 m", end="60 s", medium="still-air", body=airframe)))
    A = math.pi * 0.1 ** 2 / 4
    rho = 101325.0 / (8314.32 / 28.9644 * 288.15)     # R* / M0 of the 1976 standard
    vt = math.sqrt(2 * 1.0 * G0 / (rho * 0.5 * A))
    speed = r.signals["speed"]
    assert speed == pytest.approx(falling_speed_closed_form(r.t, G0, vt), rel=1e-7, abs=1e-9)
    assert speed[-1] == pytest.approx(vt, rel=1e-6)              # approached within 1e-6 after 9 time constants
    assert r.signals["altitude"][-1] > 0.0                       # still falling: no impact yet


def test_buoyancy_force_and_neutral_body(kinds):
    # Archimedes: F = rho g V upward (e.g. Munson, Young & Okiishi, Fundamentals of Fluid Mechanics, ch. 2).
    b = body(kinds, "buoyancy", displaced_volume="1 L")
    assert b.mass == 0.0
    assert b.force(air_tuple(RHO_W, 293.15, (0.3, 0.0, -2.0))) == pytest.approx((0.0, 0.0, RHO_W * G0 * 1e-3),
                                                                                rel=1e-15)
    # a body of mass rho V held 5 m under water does not move
    r = integrate(model_from_toml(DROP.format(alt="-5 m", end="10 s", medium="still-water",
                                              body=f'kind = "airframe"\n    dry_mass = "{RHO_W * 1e-3!r} kg"') + """
    [components.float]
    kind = "buoyancy"
    displaced_volume = "1 L"
    """))
    assert np.max(np.abs(r.signals["altitude"] + 5.0)) < 1e-9


def test_sinking_body_reaches_the_buoyancy_corrected_terminal_speed():
    # m dv/dt = (m - rho V) g - 1/2 rho C_D A v^2: v_t = sqrt(2 (m - rho V) g / (rho C_D A)) and
    # v = v_t tanh(g' t / v_t), g' = (m - rho V) g / m (closed form as above; no added mass in the model).
    m, V, cd, d = 2.0, 1e-3, 1.0, 0.1
    A = math.pi * d ** 2 / 4
    model = DROP.format(alt="-20 m", end="5 s", medium="still-water",
                        body='kind = "speed-table-airframe"\n    dry_mass = "2 kg"\n    reference_diameter = "0.1 m"\n'
                             '    drag_table = { units = ["m/s", ""], rows = [[0, 1.0], [10, 1.0]] }') + """
    [components.float]
    kind = "buoyancy"
    displaced_volume = "1 L"
    """
    r = integrate(model_from_toml(model))
    w = (m - RHO_W * V) * G0
    vt = math.sqrt(2 * w / (RHO_W * cd * A))
    assert r.signals["speed"] == pytest.approx(falling_speed_closed_form(r.t, w / m, vt), rel=1e-7, abs=1e-9)
    assert r.signals["float.buoyancy"][:, 2] == pytest.approx(RHO_W * G0 * V, rel=1e-14)  # the buoyancy term


PROJECTILE = """
    [launch]
    mount = "free"
    speed = "{v0} m/s"
    elevation = "{theta} deg"
    azimuth = "{az} deg"
    [run]
    end_time = "60 s"
    [environment.medium]
    kind = "still-air"
    [components.body]
    kind = "{kind}"
    dry_mass = "0.3 kg"
    {extra}
"""


@pytest.mark.parametrize("v0, theta, az", [(40.0, 35.0, 0.0), (25.0, 60.0, 30.0), (60.0, 80.0, -90.0)])
@pytest.mark.parametrize("kind, extra", [
    ("airframe", "drag_coefficient = 0"),
    ("mach-table-airframe", 'reference_diameter = "50 mm"\n    drag_table = { units = ["", ""], rows = [[0, 0], [2, 0]] }'),
], ids=["airframe", "mach-table-cd0"])
def test_drag_free_projectile_range_and_apogee(v0, theta, az, kind, extra):
    # R = v0^2 sin(2 theta) / g, h = v0^2 sin^2(theta) / (2 g), flight time 2 v0 sin(theta) / g (projectile
    # motion without drag; e.g. Halliday, Resnick & Walker, Fundamentals of Physics, ch. 4; from memory).
    r = integrate(model_from_toml(PROJECTILE.format(v0=v0, theta=theta, az=az, kind=kind, extra=extra)))
    th = math.radians(theta)
    assert r.message == "ground impact"
    assert r.summary["range"] == pytest.approx(v0 ** 2 * math.sin(2 * th) / G0, rel=1e-8)
    assert r.summary["apogee"] == pytest.approx(v0 ** 2 * math.sin(th) ** 2 / (2 * G0), rel=1e-8)
    assert r.summary["flight_time"] == pytest.approx(2 * v0 * math.sin(th) / G0, rel=1e-8)
    x, y = r.signals["position"][-1, :2]
    assert math.atan2(y, x) == pytest.approx(math.radians(az), abs=1e-9)
    assert r.summary["impact_speed"] == pytest.approx(v0, rel=1e-8)    # energy: lands at the launch speed


# ---------------------------------------------------------------------------
# Mach-table flights in the standard atmosphere
# ---------------------------------------------------------------------------

ROCKET = """
    flow_paths = ["motor -> outside"]
    [launch]
    mount = "guide"
    guide_length = "1 m"
    elevation = "88 deg"
    [run]
    end_time = "40 s"
    stop_at_apogee = true
    [environment.medium]
    kind = "standard-atmosphere-1976"
    datum_altitude = "600 m"
    [components.body]
    kind = "{kind}"
    dry_mass = "0.5 kg"
    reference_diameter = "38 mm"
    {drag}
    [components.motor]
    kind = "prescribed-jet"
    programme = "thrust-table"
    exhaust_velocity = "1800 m/s"
    thrust_curve = {{ units = ["s", "N"], rows = [[0, 0], [0.05, 150], [1.5, 100], [1.7, 0]] }}
    [components.outside]
    kind = "surroundings"
"""


def test_flat_mach_table_flies_like_a_constant_coefficient():
    const = integrate(model_from_toml(ROCKET.format(kind="airframe", drag="drag_coefficient = 0.45")))
    table = integrate(model_from_toml(ROCKET.format(
        kind="mach-table-airframe", drag='drag_table = { units = ["", ""], rows = [[0, 0.45], [0.9, 0.45], [3, 0.45]] }')))
    assert const.summary["max_speed"] > 150.0                    # it does fly fast enough for drag to matter
    for key in ("apogee", "max_speed", "flight_time", "guide_exit_speed"):
        assert table.summary[key] == pytest.approx(const.summary[key], rel=1e-8), key
    # drag really acted: the same flight without drag goes higher
    none = integrate(model_from_toml(ROCKET.format(kind="airframe", drag="drag_coefficient = 0")))
    assert none.summary["apogee"] > 1.1 * const.summary["apogee"]


def test_mach_table_flight_drag_matches_the_table_along_the_trajectory():
    # Recompute the recorded drag from the recorded density, temperature and velocity with numpy's own
    # interpolation of the table: D = 1/2 rho C_D(M) A v^2 against the velocity.
    rows = [[0.0, 0.40], [0.3, 0.38], [0.5, 0.42], [0.7, 0.50], [1.0, 0.75]]
    r = integrate(model_from_toml(ROCKET.format(kind="mach-table-airframe",
                                                drag=f'drag_table = {{ units = ["", ""], rows = {rows} }}')))
    s = r.signals
    free = s["airspeed"] > 1.0
    mach = s["airspeed"] / np.sqrt(1.4 * R_1976 * s["ambient_temperature"])
    assert mach.max() > 0.45                                     # the flight crosses several table rows
    cd = np.interp(mach, [m for m, _ in rows], [c for _, c in rows])
    A = math.pi * 0.038 ** 2 / 4
    expected = -0.5 * s["ambient_density"][:, None] * cd[:, None] * A * s["airspeed"][:, None] * s["velocity"]
    assert s["body.drag"][free] == pytest.approx(expected[free], rel=1e-10, abs=1e-12)


# ---------------------------------------------------------------------------
# Bad input: one clear message each (key path, what, fix)
# ---------------------------------------------------------------------------

def parse_body(table: str):
    return parse_model(model_from_toml(f"""
        [components.body]
        {table}
    """))


MACH = 'kind = "mach-table-airframe"\n dry_mass = "1 kg"\n reference_diameter = "0.1 m"\n'
SPEED = 'kind = "speed-table-airframe"\n dry_mass = "1 kg"\n reference_diameter = "0.1 m"\n'
HULL = 'kind = "boat-hull"\n dry_mass = "5 kg"\n'

BAD_TABLES = [
    ("decreasing-speeds", SPEED + ' drag_table = { units = ["m/s", ""], rows = [[0, 0.5], [20, 0.5], [10, 0.6]] }',
     "components.body.drag_table.rows[2]", "the speed column must increase strictly", "Fix: sort the rows"),
    ("hull-repeated-speed", HULL + ' resistance_table = { units = ["m/s", "N"], rows = [[0, 0], [2, 5], [2, 6]] }',
     "components.body.resistance_table.rows[2]", "the speed column must increase strictly", "Fix: sort the rows"),
    ("negative-cd", MACH + ' drag_table = { units = ["", ""], rows = [[0, 0.5], [1, -0.1]] }',
     "components.body.drag_table.rows[1]", "drag_coefficient -0.1 is below 0",
     "Fix: a drag coefficient lies between 0 and 5"),
    ("swapped-columns", SPEED + ' drag_table = { units = ["m/s", ""], rows = [[0.5, 0], [0.6, 20], [0.7, 40]] }',
     "components.body.drag_table.rows[1]", "drag_coefficient 20 is above 5", "check the column order"),
    ("negative-mach", MACH + ' drag_table = { units = ["", ""], rows = [[-0.1, 0.5], [1, 0.5]] }',
     "components.body.drag_table.rows[0]", "mach -0.1 is below 0", "Fix: the mach column starts at 0 or above"),
    ("hull-push-at-rest", HULL + ' resistance_table = { units = ["m/s", "N"], rows = [[0, 2], [1, 3]] }',
     "components.body.resistance_table.rows[0]", "a resistance of 2 N at 0 m/s would push a boat at rest",
     "Fix: give 0 N at 0 m/s"),
    ("hull-negative", HULL + ' resistance_table = { units = ["m/s", "N"], rows = [[0, 0], [1, -3]] }',
     "components.body.resistance_table.rows[1]", "resistance -3 N is below 0 N",
     "Fix: resistance is the size of the force opposing motion"),
    ("mach-with-speed-units", MACH + ' drag_table = { units = ["m/s", ""], rows = [[0, 0.5], [1, 0.5]] }',
     "components.body.drag_table.units[0]", "expected a plain number", "Fix:"),
    ("missing-table", MACH, "components.body.drag_table", "is required but missing", "Fix: add drag_table = "),
    ("gamma", MACH + ' gas_gamma = 2.0\n drag_table = { units = ["", ""], rows = [[0, 0.5], [1, 0.5]] }',
     "components.body.gas_gamma", "must be at most 1.7", "Fix: ratio of specific heats"),
    ("zero-diameter", 'kind = "speed-table-airframe"\n dry_mass = "1 kg"\n reference_diameter = "0 m"\n'
     ' drag_table = { units = ["m/s", ""], rows = [[0, 0.5], [1, 0.5]] }',
     "components.body.reference_diameter", "must be greater than 0 m", "Fix: diameter of the frontal reference area"),
]


@pytest.mark.parametrize("table, where, what, fix", [b[1:] for b in BAD_TABLES], ids=[b[0] for b in BAD_TABLES])
def test_bad_external_force_input_gets_one_clear_message(table, where, what, fix):
    with pytest.raises(ModelError) as exc:
        parse_body(table)
    msg = str(exc.value)
    assert msg.startswith(where + ":"), msg
    assert what in msg, msg
    assert fix in msg, msg


def test_a_model_of_buoyancy_alone_is_refused():
    with pytest.raises(ModelError) as exc:
        parse_body('kind = "buoyancy"\n displaced_volume = "1 L"')
    msg = str(exc.value)
    assert "components.body: a buoyancy volume carries no mass" in msg
    assert "to fix it, add the vehicle's structure" in msg


def test_hull_and_mach_airframe_add_their_cautions():
    hull = parse_body(HULL + ' resistance_table = { units = ["m/s", "N"], rows = [[0, 0], [1, 3]] }')
    assert any("swimmers" in c and "buoyancy aid" in c for c in hull.cautions())
    rocket = parse_body(MACH + ' drag_table = { units = ["", ""], rows = [[0, 0.5], [1, 0.5]] }')
    assert any("NFPA 1122" in c and "14 CFR Part 101" in c for c in rocket.cautions())
