"""The real-gas property table (tg_gastanks.gastable) against CoolProp, the reference it is built from.

The bounds below are the measured errors of the table (CoolProp 8.0.0, grid 128 x 128 in sqrt(rho) and T)
rounded up; docs/fluid-devices.md states them. CoolProp's HEOS backend evaluates the reference equation of state
of nitrogen (Span, Lemmon, Jacobsen, Wagner & Yokozeki, J. Phys. Chem. Ref. Data 29, 2000; citation from memory).
"""

from __future__ import annotations

import dataclasses
import json
import os
import subprocess
import sys

import CoolProp
import numpy as np
import pytest

from thrustgraph import integrate
from thrustgraph.base.xp import array_ops, scalar_ops
from thrustgraph.kinds.component import Ambient
from thrustgraph.kinds.parameters import parse_params
from tg_gastanks import GasTank
from tg_gastanks.fluids import expansion_exponent, new_state
from tg_gastanks.gastable import GasPropertyTable, build_gas_table, cache_key, gas_table
from test_gas_tanks import gas_tank_model

N2 = "Nitrogen"
#: the cold-gas track's bottle: 200 bar, 300 K, 212.5 kg/m^3 (CoolProp)
RHO0, T0 = 212.54, 300.0


@pytest.fixture(scope="module")
def table() -> GasPropertyTable:
    return gas_table(N2, RHO0, T0)


def _coolprop(rho, T, st, ex):
    st.update(CoolProp.DmassT_INPUTS, rho, T)
    p = st.p()
    kappa = rho * st.speed_sound() ** 2 / p
    return (p, kappa, expansion_exponent(ex, p, rho, st.smass(), kappa),
            st.hmass() - st.umass() - rho * st.first_partial_deriv(CoolProp.iUmass, CoolProp.iDmass, CoolProp.iT),
            st.cvmass())


def test_table_against_coolprop_over_the_declared_range(table):
    # Gas states (CoolProp's own phase) over the tank's range: density up to the charge, temperature from the
    # triple point to the charge. Relative errors of p, rho a^2/p, n, h - u - rho (du/drho)_T and c_v.
    st, ex, phase = new_state(N2), new_state(N2), new_state(N2)
    st.specify_phase(CoolProp.iphase_gas)
    Tc = table.T_critical
    rng = np.random.default_rng(20261205)
    worst = {"warm": np.zeros(5), "near": np.zeros(5)}
    counted = {"warm": 0, "near": 0}
    gas = (CoolProp.iphase_gas, CoolProp.iphase_supercritical_gas, CoolProp.iphase_supercritical)
    while sum(counted.values()) < 2500:
        rho, T = rng.uniform(1e-3, RHO0), rng.uniform(table.sat_T[0], T0)
        phase.update(CoolProp.DmassT_INPUTS, rho, T)
        if phase.phase() not in gas:
            continue
        band = "warm" if T >= 1.25 * Tc else "near"
        ref = np.array(_coolprop(rho, T, st, ex))
        got = np.array(table.props(rho, T, scalar_ops))
        worst[band] = np.maximum(worst[band], np.abs(got / ref - 1.0))
        counted[band] += 1
    assert counted["warm"] > 1000 and counted["near"] > 200
    # T >= 1.25 Tc (nitrogen: 158 K; the cold-gas track stays above 169 K): measured p 4e-9, kappa 1.3e-8, n 2.3e-6,
    # work 1e-8, c_v 4.4e-8
    assert np.all(worst["warm"][[0, 1, 3, 4]] < 1e-7), worst["warm"]
    assert worst["warm"][2] < 1e-5, worst["warm"]
    # T_triple ... 1.25 Tc, next to the dew line and the critical point: measured p 3.1e-5, kappa 6.1e-4, n 7.1e-3,
    # work 1.1e-3, c_v 5.1e-3 (the patches there straddle the dew line and the critical point)
    assert worst["near"][0] < 1e-4 and np.all(worst["near"] < 2e-2), worst["near"]


def test_dew_line_and_charge_density_against_coolprop(table):
    sat = new_state(N2)
    for p in np.geomspace(0.2e5, 0.999 * table.p_critical, 200):
        sat.update(CoolProp.PQ_INPUTS, p, 1.0)
        assert abs(table.dew_temperature(p, scalar_ops) - sat.T()) < 1e-4
    st = new_state(N2)
    for p, T in ((200e5, 300.0), (100e5, 250.0), (30e5, 180.0)):
        st.update(CoolProp.PT_INPUTS, p, T)
        assert table.density(p, T, scalar_ops) == pytest.approx(st.rhomass(), rel=1e-6)


def test_table_over_arrays_equals_single_designs(table):
    rng = np.random.default_rng(1)
    rho, T = rng.uniform(1.0, RHO0, 50), rng.uniform(170.0, T0, 50)
    arrays = table.props(rho, T, array_ops)
    for k in range(50):
        one = table.props(float(rho[k]), float(T[k]), scalar_ops)
        assert tuple(float(a[k]) for a in arrays) == one


def test_tabulated_tank_over_arrays_equals_single_designs():
    amb = Ambient(101325.0, 293.15, 1.2)
    base = parse_params(GasTank.parameters, {"volume": "1 L", "gauge_pressure": "100 bar", "equation_of_state":
                                             "coolprop", "temperature": "300 K"}, where="components.t",
                        params_class=GasTank.params_class())
    vol, gauge = np.array([0.5e-3, 1e-3, 2e-3]), np.array([30e5, 80e5, 150e5])
    p = dataclasses.replace(base, volume=vol, gauge_pressure=gauge)
    fns = GasTank.build_volume(p, 0, array_ops, amb)
    m0, _ = GasTank.initial_state(p, amb)
    s = [m0 * 0.7, np.array([260.0, 280.0, 240.0])]
    out, dT = fns.outlet(s, 0), fns.derivs(s, 0, np.full(3, 0.01))[1]
    for k in range(3):
        one = dataclasses.replace(base, volume=float(vol[k]), gauge_pressure=float(gauge[k]))
        f1 = GasTank.build_volume(one, 0, scalar_ops, amb)
        s1 = [float(s[0][k]), float(s[1][k])]
        assert [float(x[k]) if np.ndim(x) else x for x in out[:5]] == pytest.approx(list(f1.outlet(s1, 0)[:5]),
                                                                                   rel=0, abs=0)
        assert dT[k] == f1.derivs(s1, 0, 0.01)[1]


def test_tabulated_outcomes_against_coolprop_called_directly():
    # The same blowdown with properties from the table and from CoolProp at every evaluation: nitrogen from 150 bar
    # and 300 K through a 1 mm choked orifice into vacuum, adiabatic, for 3 s (the gas falls to about 200 K).
    kw = dict(eos="coolprop", gauge="150 bar", medium='kind = "vacuum"', end="3 s", interval="0.1 s")
    tab = integrate(gas_tank_model(**kw))
    direct = integrate(gas_tank_model(**kw, extra_tank='properties = "direct"'))
    # at the output grid (samples both runs share; a sample each run locates for itself, e.g. at a peak, can sit
    # at slightly different times)
    both = np.intersect1d(tab.t, direct.t)
    assert len(both) >= 31
    a, b = np.isin(tab.t, both), np.isin(direct.t, both)
    for key in ("tank.pressure", "tank.temperature", "tank.gas_mass", "nozzle.thrust"):
        assert np.max(np.abs(tab.signals[key][a] / direct.signals[key][b] - 1)) < 1e-8, key
    for key in ("total_impulse", "propellant_expelled", "peak_thrust"):
        assert tab.summary[key] == pytest.approx(direct.summary[key], rel=1e-8), key


def test_cache_key_names_coolprop_version_fluid_and_range(tmp_path):
    k = cache_key(N2, 230.0, 63.151, 310.0, "8.0.0")
    assert k != cache_key(N2, 230.0, 63.151, 310.0, "8.0.1")
    assert k != cache_key("Argon", 230.0, 63.151, 310.0, "8.0.0")
    assert k != cache_key(N2, 240.0, 63.151, 310.0, "8.0.0") != cache_key(N2, 230.0, 63.151, 320.0, "8.0.0")
    t = build_gas_table(N2, 50.0, 310.0, "8.0.0")
    path = tmp_path / "t.npz"
    t.save(path)
    assert GasPropertyTable.load(path, t.key) is not None
    assert GasPropertyTable.load(path, dict(t.key, coolprop="7.0.0")) is None     # another version: rebuilt
    path.write_bytes(b"not a table")
    assert GasPropertyTable.load(path, t.key) is None                              # unreadable: rebuilt


def test_a_stored_table_serves_a_run_without_coolprop(tmp_path):
    # First run: the table is built from CoolProp and stored. Second run, in an interpreter where CoolProp cannot
    # be imported at all: the stored table serves it, with the same printed result.
    env = dict(os.environ, THRUSTGRAPH_CACHE_DIR=str(tmp_path / "cache"))
    run = ["run", "cold-gas-track", "--quiet", "--set", "run.end_time=2 s", "--json"]
    code = "import sys; {}from thrustgraph.cli import main; sys.exit(main(sys.argv[1:]))"
    first = subprocess.run([sys.executable, "-c", code.format(""), *run, str(tmp_path / "a.json")], env=env,
                           capture_output=True, text=True)
    assert first.returncode == 0, first.stderr
    assert len(list((tmp_path / "cache").glob("gas-Nitrogen-*.npz"))) == 1
    blocked = "sys.modules['CoolProp'] = None; sys.modules['CoolProp.CoolProp'] = None; "
    second = subprocess.run([sys.executable, "-c", code.format(blocked), *run, str(tmp_path / "b.json")], env=env,
                            capture_output=True, text=True)
    assert second.returncode == 0, second.stderr
    assert first.stdout.replace("a.json", "b.json") == second.stdout
    a, b = (json.loads((tmp_path / n).read_text())["summary"] for n in ("a.json", "b.json"))
    assert a == b


# --- the saturation table of the self-pressurising tank ----------------------------------------------------------

def test_saturation_table_against_coolprop():
    # CO2 (Span & Wagner, J. Phys. Chem. Ref. Data 25, 1996; citation from memory) through CoolProp's two-phase
    # equilibrium, from the triple point to 298 K: measured relative errors at most 2e-10 (u and h: 5e-12 of
    # 200 kJ/kg) for every quantity; the saturated vapour's expansion exponent n within 8e-6 except within 0.25 K
    # of 231.7 K, where CoolProp's (p, s) flash from the saturated vapour starts failing below (n falls back to
    # the clipped rho a^2/p there): up to 4 % in that band.
    from tg_gastanks.saturationtable import QUANTITIES, saturation_table

    t = saturation_table("CarbonDioxide", 293.15)
    liq, vap, ex = new_state("CarbonDioxide"), new_state("CarbonDioxide"), new_state("CarbonDioxide")
    iU, iD, iT = CoolProp.iUmass, CoolProp.iDmass, CoolProp.iT
    worst = np.zeros(len(QUANTITIES))
    for T in np.random.default_rng(2).uniform(t.T_triple + 0.02, 298.15, 600):
        liq.update(CoolProp.QT_INPUTS, 0.0, T)
        vap.update(CoolProp.QT_INPUTS, 1.0, T)
        rl, rv, pr = liq.rhomass(), vap.rhomass(), vap.p()
        kv = rv * vap.speed_sound() ** 2 / pr
        ref = (pr, rl, rv, liq.umass(), vap.umass(), liq.hmass(), vap.hmass(),
               -liq.first_saturation_deriv(iD, iT) / rl ** 2, -vap.first_saturation_deriv(iD, iT) / rv ** 2,
               liq.first_saturation_deriv(iU, iT), vap.first_saturation_deriv(iU, iT), kv,
               expansion_exponent(ex, pr, rv, vap.smass(), kv))
        err = [abs(g - r) / (2e5 if 3 <= k <= 6 else abs(r)) for k, (g, r) in enumerate(zip(t.at(T), ref))]
        if abs(T - 231.7) < 0.25:
            assert err[12] < 0.05
            err[12] = 0.0
        worst = np.maximum(worst, err)
    assert np.all(worst[:12] < 1e-9) and worst[12] < 2e-5, dict(zip(QUANTITIES, worst))


def test_tabulated_cartridge_against_coolprop_called_directly():
    # The bundled CO2 cartridge cart, liquid then vapour, with tabulated and with direct properties: measured
    # total impulse 7.8e-8, propellant 3.8e-7, distance 7.3e-7, top speed 1.5e-6 and burn time 5e-6 apart.
    import thrustgraph as tg
    from thrustgraph.models.modelfile import bundled_models

    path = bundled_models()["gas-cartridge-cart"]
    tab = tg.fly(tg.load_model(path))
    direct = tg.fly(tg.load_model(path).set("components.cartridge.properties", "direct"))
    for key, rel in (("total_impulse", 1e-6), ("propellant_expelled", 2e-6), ("distance", 3e-6),
                     ("top_speed", 5e-6), ("burn_time", 2e-5), ("peak_thrust", 1e-8)):
        assert tab.summary[key] == pytest.approx(direct.summary[key], rel=rel), key
    assert [e.name for e in tab.events] == [e.name for e in direct.events]
