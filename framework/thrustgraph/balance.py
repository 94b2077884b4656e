"""The momentum balance of the vehicle as an accelerating control volume.

The vehicle is the control volume; its frame translates with acceleration
``a`` without rotating. With uniform exit conditions at each opening the
balance reads::

    M a = sum(F_surface) + sum(F_body)                     drag, weight, guide/stand reaction
          + sum_k [ mdot_k v_e,k + (p_e,k - p_a) A_e,k ] t_k   thrust of each opening, t_k = -jet_k
          - d/dt (integral of v_rel rho dV)                 internal momentum (when a vessel turns it on)

Liquid leaving a vessel is pushed by its ullage pressure and by the liquid
head in the accelerating frame, ``p_out = p + rho h (f . d)`` with the
apparent acceleration ``f = g - a`` and ``d`` the direction from the liquid
toward the outlet. Because the thrust depends on ``a`` through that head and
``a`` depends on the thrust, the two are solved together on every evaluation:
a Newton iteration on ``a`` whose Jacobian ``M I + sum c_k t_k (rho h d_k)^T``
comes from each flow element's ``dthrust/dp`` (exact in one step when the
thrust is affine in the outlet pressure, as for a quasi-steady Bernoulli jet).

Closure audits integrate, alongside the states, the mass that left through
the control surface, the ground-frame momentum it carried away and the impulse
of the external forces (drag, weight, reactions and the pressure part of the
thrust), so that a result can show both residuals.

Examples
--------
>>> from thrustgraph.modelfile import load_model, default_model_path
>>> from thrustgraph.assembly import assemble
>>> bal = Balance(assemble(load_model(default_model_path())))
>>> snap = bal.evaluate(0.0, bal.system.y0)
>>> snap["thrust"] > 0
True
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from .assembly import System
from .errors import IntegrationError
from .vectors import body_frame, solve_rank_one, to_world

__all__ = ["Balance", "Kinematics"]


class Kinematics:
    """How the vehicle may move in the current phase: held, on the guide or free."""

    HELD, GUIDE, FREE = 0, 1, 2


class Balance:
    """Right-hand side and snapshot evaluation of an assembled :class:`System`.

    The discrete phase (each component's mode, the kinematic constraint, and
    whether apogee has passed) is set with :meth:`set_phase` between
    integration segments; within a segment it is fixed.
    """

    max_newton = 6

    def __init__(self, system: System) -> None:
        self.system = system
        sysm = system
        self._bodies_force = [b.force for _, b in sysm.bodies if b.force is not None]
        self._streams = sysm.streams
        self._jets = sysm.jets
        self._mode_index = {n: k for k, n in enumerate(sysm.moded)}
        self._stream_mode = [self._mode_index.get(st.volume, -1) for st in sysm.streams]
        self._jet_mode = [self._mode_index.get(n, -1) for n, _ in sysm.jets]
        self._u = sysm.guide_dir
        self._az = sysm.launch.azimuth
        self._follow = sysm.launch.attitude == "follow-wind"
        self._vmin = max(sysm.launch.min_follow_speed, 1e-9)
        self._x0 = (sysm.y0[0], sysm.y0[1], sysm.y0[2])
        self.modes: list[int] = list(sysm.mode0)
        mount = sysm.launch.mount
        self.kinematics = {"held": Kinematics.HELD, "guide": Kinematics.GUIDE, "free": Kinematics.FREE}[mount]
        self.descending = False
        aft = (-1.0, 0.0, 0.0)
        # Directions exactly aft along the body axis need no rotation (the common case).
        self._aft = [(st.vol.outlet_dir == aft, st.fl.jet_dir == aft) for st in sysm.streams]
        self._jet_aft = [jf.jet_dir == aft for _, jf in sysm.jets]
        self._need_frame = not all(a and b for a, b in self._aft) or not all(self._jet_aft)
        self.set_phase(self.modes, self.kinematics, False)

    # ------------------------------------------------------------------
    def set_phase(self, modes: Sequence[int], kinematics: int, descending: bool) -> None:
        """Fix the discrete phase for the next integration segment."""
        self.modes = list(modes)
        self.kinematics = kinematics
        self.descending = descending
        m = self.modes
        self._smode = [m[k] if k >= 0 else 0 for k in self._stream_mode]
        self._jmode = [m[k] if k >= 0 else 0 for k in self._jet_mode]

    # ------------------------------------------------------------------
    def rhs(self, t: float, y: Any) -> list[float]:
        """Time derivative of the flat state vector (SI); what solve_ivp calls."""
        return self._balance(t, y, None)

    def drives(self, t: float, y: Any) -> dict[str, float]:
        """Outlet drive pressure (outlet pressure with head minus ambient, Pa) per vessel, for events."""
        rec: dict[str, Any] = {"_light": True}
        self._balance(t, y, rec)
        return rec

    def evaluate(self, t: float, y: Any) -> dict[str, Any]:
        """Every term of the balance at one instant, as a flat dict of SI values.

        Vectors are 3-tuples. Keys include ``acceleration``, ``mass``,
        ``thrust`` (along the body axis), ``thrust_vector``, per component
        ``NAME.mass_flow``, ``NAME.exit_velocity``, ``NAME.momentum_flux``,
        ``NAME.pressure_thrust``, ``NAME.drag`` and the vessel signals, and the
        ``ledger``: a list of ``(component, term, vector)`` whose sum is M a.
        """
        rec: dict[str, Any] = {}
        rec["derivatives"] = self._balance(t, y, rec)
        return rec

    # ------------------------------------------------------------------
    def _balance(self, t: float, y: Any, rec: dict | None) -> list[float]:
        s = y.tolist() if hasattr(y, "tolist") else list(y)
        sysm = self.system
        vx, vy, vz = s[3], s[4], s[5]
        rho, pa, Ta, wx, wy, wz = sysm.medium(s[2], t)
        g = sysm.gravity(s[2])
        vrx, vry, vrz = vx - wx, vy - wy, vz - wz
        sp = math.sqrt(vrx * vrx + vry * vry + vrz * vrz)
        kin = self.kinematics
        u = self._u
        if self._follow and kin == Kinematics.FREE and sp > self._vmin:
            e = (vrx / sp, vry / sp, vrz / sp)
        else:
            e = u
        frame = body_frame(e, self._az) if self._need_frame else None
        ex_, ey_, ez_ = -e[0], -e[1], -e[2]

        # Mass and external forces (drag and friction of bodies, weight).
        M = sysm.fixed_mass
        streams = self._streams
        for st in streams:
            M += st.vol.mass(s)
        for _, jf in self._jets:
            M += jf.mass(s)
        air = (rho, pa, Ta, vrx, vry, vrz, sp)
        Dx = Dy = Dz = 0.0
        drags = [] if rec is not None else None
        for fn in self._bodies_force:
            f = fn(air)
            Dx += f[0]; Dy += f[1]; Dz += f[2]
            if drags is not None:
                drags.append(f)
        Wz = -M * g
        # Fixed part of the force: external + jets (independent of a).
        Fx, Fy, Fz = Dx, Dy, Dz + Wz
        Px = Py = Pz = 0.0      # pressure-thrust part (a surface force: enters the impulse audit)
        mout = 0.0
        Ex = Ey = Ez = 0.0      # ground-frame momentum carried away per second
        jet_out = []
        jmode = self._jmode
        for k, (_, jf) in enumerate(self._jets):
            mdot, ve, pe, Ae = jf.jet(t, s, jmode[k], pa)
            jd = (ex_, ey_, ez_) if self._jet_aft[k] else to_world(jf.jet_dir, frame)
            pth = (pe - pa) * Ae
            T = mdot * ve + pth
            Fx -= T * jd[0]; Fy -= T * jd[1]; Fz -= T * jd[2]
            Px -= pth * jd[0]; Py -= pth * jd[1]; Pz -= pth * jd[2]
            mout += mdot
            Ex += mdot * (vx + ve * jd[0]); Ey += mdot * (vy + ve * jd[1]); Ez += mdot * (vz + ve * jd[2])
            jet_out.append((mdot, ve, pe, Ae, jd, T))

        # Vessel outlets (pressure without head) and their world directions.
        outs = []
        coupled = False
        smode = self._smode
        aft = self._aft
        for k, st in enumerate(streams):
            o = st.vol.outlet(s, smode[k])
            a_out, a_jet = aft[k]
            dw = (ex_, ey_, ez_) if a_out else to_world(st.vol.outlet_dir, frame)
            jd = (ex_, ey_, ez_) if a_jet else to_world(st.fl.jet_dir, frame)
            outs.append((o, dw, jd))
            if o[6] != 0.0:
                coupled = True

        gx, gy, gz = 0.0, 0.0, -g
        ax = ay = az = 0.0
        first = self._streams_at(s, outs, pa, gx, gy, gz)          # flows at a = 0
        flows, (Tx, Ty, Tz), (Qx, Qy, Qz), (Ix, Iy, Iz) = first
        Gx, Gy, Gz = Fx + Tx + Ix, Fy + Ty + Iy, Fz + Tz + Iz      # every force, at the current a
        if kin == Kinematics.HELD:
            Rx, Ry, Rz = -Gx, -Gy, -Gz
        elif kin == Kinematics.FREE:
            Rx = Ry = Rz = 0.0
            if not coupled:
                ax, ay, az = Gx / M, Gy / M, Gz / M
            else:
                # Newton on M a - G(a) = 0; exact in one step when the thrust is affine in the outlet pressure.
                for it in range(self.max_newton):
                    rx, ry, rz = M * ax - Gx, M * ay - Gy, M * az - Gz
                    if it and abs(rx) + abs(ry) + abs(rz) <= 1e-12 * (abs(Gx) + abs(Gy) + abs(Gz) + M * g):
                        break
                    pairs = []
                    for (o, dw, jd), fl in zip(outs, flows):
                        if o[6] != 0.0:
                            c, hd = fl[4], o[6]
                            pairs.append(((-c * jd[0], -c * jd[1], -c * jd[2]), (hd * dw[0], hd * dw[1], hd * dw[2])))
                    try:
                        dx, dy_, dz = solve_rank_one(M, pairs, (rx, ry, rz))
                    except ZeroDivisionError:
                        raise IntegrationError(_SINGULAR) from None
                    ax -= dx; ay -= dy_; az -= dz
                    flows, (Tx, Ty, Tz), (Qx, Qy, Qz), (Ix, Iy, Iz) = self._streams_at(
                        s, outs, pa, gx - ax, gy - ay, gz - az)
                    Gx, Gy, Gz = Fx + Tx + Ix, Fy + Ty + Iy, Fz + Tz + Iz
        else:  # on the guide: a = alpha u, and alpha >= 0 while resting at its foot
            x0 = self._x0
            resting = ((s[0] - x0[0]) * u[0] + (s[1] - x0[1]) * u[1] + (s[2] - x0[2]) * u[2] <= 0.0
                       and vx * u[0] + vy * u[1] + vz * u[2] <= 0.0)
            alpha = 0.0
            for it in range(self.max_newton if coupled else 1):
                Gu = Gx * u[0] + Gy * u[1] + Gz * u[2]
                r = M * alpha - Gu
                if it and abs(r) <= 1e-12 * (abs(Gu) + M * g):
                    break
                J = M
                for (o, dw, jd), fl in zip(outs, flows):
                    if o[6] != 0.0:
                        J -= fl[4] * (jd[0] * u[0] + jd[1] * u[1] + jd[2] * u[2]) * o[6] * (
                            dw[0] * u[0] + dw[1] * u[1] + dw[2] * u[2])
                if J <= 0.0:
                    raise IntegrationError(_SINGULAR)
                alpha -= r / J
                if alpha < 0.0 and resting:
                    alpha = 0.0
                    flows, (Tx, Ty, Tz), (Qx, Qy, Qz), (Ix, Iy, Iz) = first
                    Gx, Gy, Gz = Fx + Tx + Ix, Fy + Ty + Iy, Fz + Tz + Iz
                    break
                if not coupled:
                    break
                flows, (Tx, Ty, Tz), (Qx, Qy, Qz), (Ix, Iy, Iz) = self._streams_at(
                    s, outs, pa, gx - alpha * u[0], gy - alpha * u[1], gz - alpha * u[2])
                Gx, Gy, Gz = Fx + Tx + Ix, Fy + Ty + Iy, Fz + Tz + Iz
            ax, ay, az = alpha * u[0], alpha * u[1], alpha * u[2]
            Rx, Ry, Rz = M * ax - Gx, M * ay - Gy, M * az - Gz

        # Derivatives: kinematics, component states, audit accumulators.
        out = [vx, vy, vz, ax, ay, az] if kin != Kinematics.HELD else [0.0, 0.0, 0.0, 0.0, 0.0, 0.0]
        if kin == Kinematics.HELD:
            vx = vy = vz = 0.0
        for k, st in enumerate(streams):
            out.extend(st.vol.derivs(s, smode[k], flows[k][0]))
        for k, (_, jf) in enumerate(self._jets):
            out.extend(jf.derivs(t, s, jmode[k], jet_out[k][0]))
        for (o, dw, jd), fl in zip(outs, flows):
            mdot, ve = fl[0], fl[1]
            mout += mdot
            Ex += mdot * (vx + ve * jd[0]); Ey += mdot * (vy + ve * jd[1]); Ez += mdot * (vz + ve * jd[2])
        out.append(mout)
        out.extend((Ex, Ey, Ez))
        out.extend((Dx + Px + Qx + Rx, Dy + Py + Qy + Ry, Dz + Wz + Pz + Qz + Rz))
        out.extend((-Ix, -Iy, -Iz))  # modelled d/dt of the internal momentum

        if rec is not None:
            if "_light" in rec:
                for st, fl in zip(streams, flows):
                    rec[st.volume] = fl[6] - pa
            else:
                self._record(rec, t, s, M, e, (ax, ay, az), drags, (0.0, 0.0, Wz), (Rx, Ry, Rz), outs, flows,
                             jet_out, rho, pa, Ta, (wx, wy, wz), sp, g)
        return out

    def _streams_at(self, s, outs, pa, fx, fy, fz):
        """Flows of every vessel outlet at apparent acceleration f = g - a."""
        flows = []
        Tx = Ty = Tz = 0.0
        Qx = Qy = Qz = 0.0
        Ix = Iy = Iz = 0.0
        for k, st in enumerate(self._streams):
            o, dw, jd = outs[k]
            if o[6] != 0.0:
                hp = o[6] * (fx * dw[0] + fy * dw[1] + fz * dw[2])
                up = (o[0] + hp, o[1], o[2], o[3], o[4], o[5], o[6])
            else:
                hp, up = 0.0, o
            fl = st.fl.flow(up, pa)
            mdot, ve, pe, Ae = fl[0], fl[1], fl[2], fl[3]
            pth = (pe - pa) * Ae
            T = mdot * ve + pth
            Tx -= T * jd[0]; Ty -= T * jd[1]; Tz -= T * jd[2]
            Qx -= pth * jd[0]; Qy -= pth * jd[1]; Qz -= pth * jd[2]
            vint = 0.0
            if st.vol.internal is not None:
                vint, _moving = st.vol.internal(s, self._smode[k], mdot)
                # d/dt of the contents' momentum toward the outlet is -mdot * v_int (quasi-steady);
                # it enters the balance with a minus sign.
                Ix += mdot * vint * dw[0]; Iy += mdot * vint * dw[1]; Iz += mdot * vint * dw[2]
            flows.append((mdot, ve, pe, Ae, fl[4], hp, up[0], vint))
        return flows, (Tx, Ty, Tz), (Qx, Qy, Qz), (Ix, Iy, Iz)

    # ------------------------------------------------------------------
    def _record(self, rec, t, s, M, e, a, drags, weight, reaction, outs, flows, jet_out, rho, pa, Ta, wind, sp, g):
        sysm = self.system
        rec.update(time=t, mass=M, axis=e, acceleration=a, weight=weight, reaction=reaction,
                   position=(s[0], s[1], s[2]), velocity=(s[3], s[4], s[5]), airspeed=sp,
                   ambient_pressure=pa, ambient_density=rho, ambient_temperature=Ta, wind=wind, gravity=g)
        ledger: list[tuple[str, str, tuple]] = []
        for (n, _), f in zip([(n, b) for n, b in sysm.bodies if b.force is not None], drags):
            rec[f"{n}.drag"] = f
            ledger.append((n, "drag", f))
        ledger.append(("vehicle", "weight", weight))
        kin = self.kinematics
        if kin != Kinematics.FREE:
            ledger.append(("vehicle", "stand reaction" if kin == Kinematics.HELD else "guide reaction", reaction))
        tvx = tvy = tvz = 0.0
        mass_flow = 0.0
        for k, st in enumerate(sysm.streams):
            o, dw, jd = outs[k]
            mdot, ve, pe, Ae, _c, hp, pup, vint = flows[k]
            mf = (-mdot * ve * jd[0], -mdot * ve * jd[1], -mdot * ve * jd[2])
            pth = (pe - pa) * Ae
            pf = (-pth * jd[0], -pth * jd[1], -pth * jd[2])
            ledger.append((st.flow, "momentum flux", mf))
            ledger.append((st.flow, "pressure thrust", pf))
            if st.vol.internal is not None:
                im = (mdot * vint * dw[0], mdot * vint * dw[1], mdot * vint * dw[2])
                ledger.append((st.volume, "internal momentum rate", im))
                mk = self._stream_mode[k]
                _v, moving = st.vol.internal(s, self.modes[mk] if mk >= 0 else 0, mdot)
                rec[f"{st.volume}.internal_momentum"] = (moving * vint * dw[0], moving * vint * dw[1],
                                                         moving * vint * dw[2])
            tvx += mf[0] + pf[0]; tvy += mf[1] + pf[1]; tvz += mf[2] + pf[2]
            mass_flow += mdot
            rec[f"{st.flow}.mass_flow"] = mdot
            rec[f"{st.flow}.exit_velocity"] = ve
            rec[f"{st.flow}.exit_pressure"] = pe
            rec[f"{st.flow}.thrust"] = mdot * ve + pth
            rec[f"{st.volume}.head_pressure"] = hp
            rec[f"{st.volume}.outlet_pressure"] = pup
            rec[f"{st.volume}.drive"] = pup - pa
            mk = self._stream_mode[k]
            for key, val in st.vol.signals(s, self.modes[mk] if mk >= 0 else 0).items():
                rec[f"{st.volume}.{key}"] = val
        for k, (n, jf) in enumerate(sysm.jets):
            mdot, ve, pe, Ae, jd, T = jet_out[k]
            mf = (-mdot * ve * jd[0], -mdot * ve * jd[1], -mdot * ve * jd[2])
            pth = (pe - pa) * Ae
            pf = (-pth * jd[0], -pth * jd[1], -pth * jd[2])
            ledger.append((n, "momentum flux", mf))
            ledger.append((n, "pressure thrust", pf))
            tvx += mf[0] + pf[0]; tvy += mf[1] + pf[1]; tvz += mf[2] + pf[2]
            mass_flow += mdot
            rec[f"{n}.mass_flow"] = mdot
            rec[f"{n}.exit_velocity"] = ve
            rec[f"{n}.thrust"] = T
            rec[f"{n}.drive"] = 1.0
            mk = self._jet_mode[k]
            for key, val in jf.signals(t, s, self.modes[mk] if mk >= 0 else 0).items():
                rec[f"{n}.{key}"] = val
        rec["thrust_vector"] = (tvx, tvy, tvz)
        rec["thrust"] = tvx * e[0] + tvy * e[1] + tvz * e[2]
        rec["mass_flow"] = mass_flow
        rec["ledger"] = ledger
        rec["inertia"] = (M * a[0], M * a[1], M * a[2])


_SINGULAR = ("the liquid head makes the acceleration undetermined (the nozzle is too large for the vessel's "
             "bore under the quasi-steady model). Fix: use a vessel bore larger than about 1.5 times the "
             "nozzle diameter")
