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

from .assembly import ACCUMULATORS, System
from .errors import IntegrationError
from .kernel import phase_functions
from .vectors import body_frame, solve_rank_one, to_world
from scipy.optimize import brentq

__all__ = ["Balance", "Kinematics"]



class Kinematics:
    """How the vehicle may move in the current phase: held, on the guide, free, or on an endless track."""

    HELD, GUIDE, FREE, TRACK = 0, 1, 2, 3


_AFT = (-1.0, 0.0, 0.0)
_ZERO_FLOW = (0.0, 0.0, 0.0, 0.0, 0.0)


class Balance:
    """Right-hand side and snapshot evaluation of an assembled :class:`System`.

    The discrete phase (each component's mode, the kinematic constraint, and
    whether apogee has passed) is set with :meth:`set_phase` between
    integration segments; within a segment it is fixed.
    """

    max_newton = 8
    generate = True   # default for ``generated``: the per-phase generated right-hand side, or the general one

    def __init__(self, system: System, *, generated: bool | None = None) -> None:
        self.system = system
        self.generated = type(self).generate if generated is None else generated
        self._phase_fns: dict[tuple, tuple] = {}
        sysm = system
        slot = {n: k for k, n in enumerate(sysm.moded)}
        self._slot = slot
        self._bodies = [(n, b, slot.get(n, -1)) for n, b in sysm.bodies]
        self._vols = [(n, v, slot.get(n, -1)) for n, v in sysm.volumes]
        self._vol_index = {n: k for k, (n, _, _) in enumerate(self._vols)}
        self._srcs = [(n, src, slot.get(n, -1)) for n, src in sysm.sources]
        self._src_index = {n: k for k, (n, _, _) in enumerate(self._srcs)}
        self._jets = [(n, j, slot.get(n, -1)) for n, j in sysm.jets]
        self._lines = sysm.lines
        # per line: (is_volume, start index, terminal slot, series slots, outlet-aft, jet-aft)
        self._line_info = []
        for ln in sysm.lines:
            isvol = ln.start_kind == "volume"
            idx = self._vol_index[ln.start] if isvol else self._src_index[ln.start]
            out_dir = ln.vol.outlet_dir if isvol else _AFT
            self._line_info.append((isvol, idx, slot.get(ln.terminal, -1),
                                    tuple(slot.get(m, -1) for m, _ in ln.series),
                                    out_dir == _AFT, ln.fl.jet_dir == _AFT, out_dir))
        self._owners = []
        for role, n in sysm.owners:
            table = {"volume": self._vol_index, "jet": {m: k for k, (m, _, _) in enumerate(self._jets)},
                     "body": {m: k for k, (m, _, _) in enumerate(self._bodies)}}.get(role)
            if table is None:
                raise IntegrationError(f"components.{n}: a {role} cannot carry states in this release")
            self._owners.append((role, table[n]))
        self._jet_aft = [j.jet_dir == _AFT for _, j, _ in self._jets]
        self._need_frame = not all(a and b for _, _, _, _, a, b, _ in self._line_info) or not all(self._jet_aft)
        self._u = sysm.guide_dir
        self._az = sysm.launch.azimuth
        self._mu = sysm.launch.friction
        self._follow = sysm.launch.attitude == "follow-wind"
        self._vmin = max(sysm.launch.min_follow_speed, 1e-9)
        self._x0 = (sysm.y0[0], sysm.y0[1], sysm.y0[2])
        # Runtime tables, so the right-hand side does no attribute look-ups it can avoid.
        self._mass_fns = [vf.mass for _, vf, _ in self._vols] + [jf.mass for _, jf, _ in self._jets]
        self._force_fns = [(k, bf.force_state is not None, bf.force_state or bf.force)
                           for k, (_, bf, _) in enumerate(self._bodies) if (bf.force_state or bf.force) is not None]
        self._line_rt = [(info[0], info[1], ln.fl.flow, not ln.series,
                          ln.vol.internal if info[0] else None,
                          ln.src.inflow if not info[0] and getattr(ln.src, "inflow", None) else None, ln)
                         for info, ln in zip(self._line_info, sysm.lines)]
        mount = sysm.launch.mount
        kin = {"held": Kinematics.HELD, "guide": Kinematics.GUIDE, "free": Kinematics.FREE,
               "track": Kinematics.TRACK}[mount]
        self.set_phase(list(sysm.mode0), kin, False)

    # ------------------------------------------------------------------
    def set_phase(self, modes: Sequence[int], kinematics: int, descending: bool, slide: float = 0.0) -> None:
        """Fix the discrete phase for the next integration segment.

        ``slide`` is the way the vehicle moves along a guide or track during the segment (+1 along the guide
        direction, -1 against it): kinetic friction then opposes that direction for the whole segment, and the
        integrator ends the segment when the vehicle comes to rest. With 0 the friction follows the sign of the
        current speed (static friction at rest), as for a vehicle that starts the segment at rest.
        """
        self.modes = list(modes)
        self.kinematics = kinematics
        self.descending = descending
        self.slide = 0.0 if kinematics not in (Kinematics.GUIDE, Kinematics.TRACK) else float(slide)
        m = self.modes

        def mode_of(k: int) -> int:
            return m[k] if k >= 0 else 0
        self._bmode = [mode_of(k) for _, _, k in self._bodies]
        self._vmode = [mode_of(k) for _, _, k in self._vols]
        self._smode = [mode_of(k) for _, _, k in self._srcs]
        self._jmode = [mode_of(k) for _, _, k in self._jets]
        self._lmode = [(mode_of(tk), tuple(mode_of(k) for k in sk)) for _, _, tk, sk, _, _, _ in self._line_info]
        if self.generated:
            key = (tuple(self.modes), kinematics, self.slide)
            fns = self._phase_fns.get(key)
            if fns is None:
                fns = self._phase_fns[key] = phase_functions(self)
            self.phase_rhs, self.phase_core, self._phase_drives = fns
        else:
            self.phase_rhs, self.phase_core, self._phase_drives = \
                self.reference_rhs, self._reference_core, self._reference_drives

    # ------------------------------------------------------------------
    def rhs(self, t: float, y: Any) -> list[float]:
        """Time derivative of the flat state vector (SI) in the current phase.

        This calls the phase's generated function (:mod:`thrustgraph.kernel`); the integrator passes
        :attr:`phase_rhs` to solve_ivp directly, saving this call.
        """
        return self.phase_rhs(t, y)

    def reference_rhs(self, t: float, y: Any) -> list[float]:
        """The same derivatives from the general (loop-and-branch) balance; the generated one must equal it."""
        return self._balance(t, y if type(y) is list else y.tolist(), None)

    def _reference_core(self, t: float, y: Any) -> list[float]:
        return self.reference_rhs(t, y)[:self.system.n_states - len(ACCUMULATORS)]

    def drives(self, t: float, y: Any) -> dict[str, float]:
        """Drive pressure (Pa) per vessel and per discharging element, for events.

        A vessel's drive is its outlet pressure with the liquid head minus
        ambient; an element's is the pressure at its inlet minus ambient.
        """
        return self._phase_drives(t, y)

    def _reference_drives(self, t: float, y: Any) -> dict[str, float]:
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
        s = y if type(y) is list else (y.tolist() if hasattr(y, "tolist") else list(y))
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
        ax_, ay_, az_ = -e[0], -e[1], -e[2]

        # Mass and the forces that do not depend on the acceleration.
        M = sysm.fixed_mass
        vmode = self._vmode
        vols = self._vols
        for fn in self._mass_fns:
            M += fn(s)
        jmode = self._jmode
        air = (rho, pa, Ta, vrx, vry, vrz, sp)
        Dx = Dy = Dz = 0.0
        drags = [] if rec is not None else None
        bmode = self._bmode
        for k, stateful, fn in self._force_fns:
            f = fn(t, s, bmode[k], air) if stateful else fn(air)
            Dx += f[0]; Dy += f[1]; Dz += f[2]
            if drags is not None:
                drags.append((k, f))
        Wz = -M * g
        Fx, Fy, Fz = Dx, Dy, Dz + Wz
        Px = Py = Pz = 0.0      # pressure-thrust part (a surface force: enters the impulse audit)
        mout = 0.0
        Ex = Ey = Ez = 0.0      # ground-frame momentum carried away per second
        jet_out = []
        for k, (_, jf, _) in enumerate(self._jets):
            mdot, ve, pe, Ae = jf.jet(t, s, jmode[k], pa)
            jd = (ax_, ay_, az_) if self._jet_aft[k] else to_world(jf.jet_dir, frame)
            pth = (pe - pa) * Ae
            T = mdot * ve + pth
            Fx -= T * jd[0]; Fy -= T * jd[1]; Fz -= T * jd[2]
            Px -= pth * jd[0]; Py -= pth * jd[1]; Pz -= pth * jd[2]
            mout += mdot
            Ex += mdot * (vx + ve * jd[0]); Ey += mdot * (vy + ve * jd[1]); Ez += mdot * (vz + ve * jd[2])
            jet_out.append((mdot, ve, pe, Ae, jd, T))

        # Starting conditions of every line (vessel outlets without head, source supplies).
        vouts = [vf.outlet(s, vmode[k]) for k, (_, vf, _) in enumerate(vols)]
        if self._srcs:
            smode = self._smode
            supplies = [sf.supply(t, s, smode[k], air) for k, (_, sf, _) in enumerate(self._srcs)]
        else:
            supplies = ()
        outs = []
        coupled = False
        aft = (ax_, ay_, az_)
        for info, rt in zip(self._line_info, self._line_rt):
            isvol, idx, _, _, a_out, a_jet, odir = info
            o = vouts[idx] if isvol else supplies[idx][0]
            outs.append((o, aft if a_out else to_world(odir, frame),
                         aft if a_jet else to_world(rt[6].fl.jet_dir, frame)))
            if isvol and o[6] != 0.0:
                coupled = True

        gx, gy, gz = 0.0, 0.0, -g
        ax = ay = az = 0.0
        first = self._lines_at(t, s, outs, supplies, pa, gx, gy, gz)          # flows at a = 0
        flows, Tx, Ty, Tz, Qx, Qy, Qz, Ix, Iy, Iz = first
        Gx, Gy, Gz = Fx + Tx + Ix, Fy + Ty + Iy, Fz + Tz + Iz      # every applied force, at the current a
        Cx = Cy = Cz = 0.0   # friction on the guide or track
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
                    for (o, dw, jd), fl, info in zip(outs, flows, self._line_info):
                        if info[0] and o[6] != 0.0:
                            c, hd = fl[4], o[6]
                            pairs.append(((-c * jd[0], -c * jd[1], -c * jd[2]), (hd * dw[0], hd * dw[1], hd * dw[2])))
                    try:
                        dx, dy_, dz = solve_rank_one(M, pairs, (rx, ry, rz))
                    except ZeroDivisionError:
                        raise IntegrationError(_SINGULAR) from None
                    ax -= dx; ay -= dy_; az -= dz
                    flows, Tx, Ty, Tz, Qx, Qy, Qz, Ix, Iy, Iz = self._lines_at(
                        t, s, outs, supplies, pa, gx - ax, gy - ay, gz - az)
                    Gx, Gy, Gz = Fx + Tx + Ix, Fy + Ty + Iy, Fz + Tz + Iz
        else:  # guide or track: a = alpha u; friction mu |N| against the motion
            x0 = self._x0
            mu = self._mu
            v_along = vx * u[0] + vy * u[1] + vz * u[2]
            at_foot = kin == Kinematics.GUIDE and v_along <= 0.0 and \
                (s[0] - x0[0]) * u[0] + (s[1] - x0[1]) * u[1] + (s[2] - x0[2]) * u[2] <= 0.0
            alpha = 0.0
            for it in range(self.max_newton if coupled else 1):
                Gu = Gx * u[0] + Gy * u[1] + Gz * u[2]
                fr = 0.0
                if mu > 0.0:
                    nx_, ny_, nz_ = Gx - Gu * u[0], Gy - Gu * u[1], Gz - Gu * u[2]
                    fmax = mu * math.sqrt(nx_ * nx_ + ny_ * ny_ + nz_ * nz_)
                    slide = self.slide or v_along
                    if slide > 0.0:
                        fr = -fmax
                    elif slide < 0.0:
                        fr = fmax
                    else:  # at rest: static friction holds up to fmax
                        fr = -fmax if Gu > fmax else (fmax if Gu < -fmax else -Gu)
                r = M * alpha - Gu - fr
                if it and abs(r) <= 1e-12 * (abs(Gu) + M * g + 1e-30):
                    break
                J = M
                for (o, dw, jd), fl, info in zip(outs, flows, self._line_info):
                    if info[0] and o[6] != 0.0:
                        J -= fl[4] * (jd[0] * u[0] + jd[1] * u[1] + jd[2] * u[2]) * o[6] * (
                            dw[0] * u[0] + dw[1] * u[1] + dw[2] * u[2])
                if J <= 0.0:
                    raise IntegrationError(_SINGULAR)
                alpha -= r / J
                if alpha < 0.0 and at_foot:
                    alpha = 0.0
                    flows, Tx, Ty, Tz, Qx, Qy, Qz, Ix, Iy, Iz = first
                    Gx, Gy, Gz = Fx + Tx + Ix, Fy + Ty + Iy, Fz + Tz + Iz
                    break
                if not coupled:
                    break
                flows, Tx, Ty, Tz, Qx, Qy, Qz, Ix, Iy, Iz = self._lines_at(
                    t, s, outs, supplies, pa, gx - alpha * u[0], gy - alpha * u[1], gz - alpha * u[2])
                Gx, Gy, Gz = Fx + Tx + Ix, Fy + Ty + Iy, Fz + Tz + Iz
            if alpha == 0.0 and at_foot:
                fr = 0.0
            Cx, Cy, Cz = fr * u[0], fr * u[1], fr * u[2]
            ax, ay, az = alpha * u[0], alpha * u[1], alpha * u[2]
            Rx, Ry, Rz = M * ax - Gx - Cx, M * ay - Gy - Cy, M * az - Gz - Cz

        # Derivatives: kinematics, component states (in layout order), audit accumulators.
        if kin == Kinematics.HELD:
            out = [0.0, 0.0, 0.0, 0.0, 0.0, 0.0]
            vx = vy = vz = 0.0
        else:
            out = [vx, vy, vz, ax, ay, az]
        if self._owners:
            vol_out = [0.0] * len(vols)
            for info, fl in zip(self._line_info, flows):
                if info[0]:
                    vol_out[info[1]] += fl[0]
            for role, k in self._owners:
                if role == "volume":
                    out.extend(vols[k][1].derivs(s, vmode[k], vol_out[k]))
                elif role == "jet":
                    out.extend(self._jets[k][1].derivs(t, s, jmode[k], jet_out[k][0]))
                else:
                    out.extend(self._bodies[k][1].derivs(t, s, bmode[k], air))
        Nx = Ny = Nz = 0.0  # momentum of the entering fluid (ram drag, hose inflow)
        for (o, dw, jd), fl, info in zip(outs, flows, self._line_info):
            mdot, ve = fl[0], fl[1]
            Ex += mdot * (vx + ve * jd[0]); Ey += mdot * (vy + ve * jd[1]); Ez += mdot * (vz + ve * jd[2])
            if info[0]:
                mout += mdot
            else:
                vin = fl[8]
                Ex -= mdot * (vx + vin[0]); Ey -= mdot * (vy + vin[1]); Ez -= mdot * (vz + vin[2])
                Nx += mdot * vin[0]; Ny += mdot * vin[1]; Nz += mdot * vin[2]
        out.append(mout)
        out.extend((Ex, Ey, Ez))
        out.extend((Dx + Px + Qx + Rx + Cx, Dy + Py + Qy + Ry + Cy, Dz + Wz + Pz + Qz + Rz + Cz))
        # modelled d/dt of the internal momentum; the inflow momentum is already in the exhaust accumulator
        out.extend((Nx - Ix, Ny - Iy, Nz - Iz))

        if rec is not None:
            if "_light" in rec:
                for ln, fl in zip(self._lines, flows):
                    rec.setdefault(ln.start, fl[5] - pa)
                    rec[ln.terminal] = fl[6] - pa
            else:
                self._record(rec, t, s, M, e, (ax, ay, az), drags, (0.0, 0.0, Wz), (Rx, Ry, Rz), (Cx, Cy, Cz),
                             outs, flows, jet_out, supplies, rho, pa, Ta, (wx, wy, wz), sp, g)
        return out

    def _lines_at(self, t, s, outs, supplies, pa, fx, fy, fz):
        """Flows of every line at apparent acceleration f = g - a.

        Returns per line ``(mdot, ve, pe, Ae, c, p_start, p_terminal_in, v_int, v_in, rises)`` and the sums of
        thrust, pressure thrust and the internal-momentum and inflow terms. The inflow term is folded into the
        third sum (it does not depend on a for a given flow).
        """
        flows = []
        Tx = Ty = Tz = 0.0
        Qx = Qy = Qz = 0.0
        Ix = Iy = Iz = 0.0
        lmode = self._lmode
        vmode = self._vmode
        for j, rt in enumerate(self._line_rt):
            isvol, idx, flowfn, simple, internal, inflow, ln = rt
            o, dw, jd = outs[j]
            tmode = lmode[j][0]
            mfix = -1.0
            vin = None
            if isvol:
                if o[6] != 0.0:
                    up = (o[0] + o[6] * (fx * dw[0] + fy * dw[1] + fz * dw[2]), o[1], o[2], o[3], o[4], o[5], o[6])
                else:
                    up = o
            else:
                sup = supplies[idx]
                mfix, vin = sup[1], (sup[2], sup[3], sup[4])
                up = o
            if simple and mfix < 0.0:
                fl = flowfn(up, pa, tmode)
                rises = ()
                p_in = up[0]
            else:
                fl, p_in, rises = _solve_line(ln, up, pa, tmode, lmode[j][1], mfix)
            mdot, ve, pe, Ae = fl[0], fl[1], fl[2], fl[3]
            if inflow is not None:
                vin = inflow(mdot, up)
            pth = (pe - pa) * Ae
            T = mdot * ve + pth
            Tx -= T * jd[0]; Ty -= T * jd[1]; Tz -= T * jd[2]
            if pth != 0.0:
                Qx -= pth * jd[0]; Qy -= pth * jd[1]; Qz -= pth * jd[2]
            vint = 0.0
            if internal is not None:
                vint, _moving = internal(s, vmode[idx], mdot)
                # d/dt of the contents' momentum toward the outlet is -mdot * v_int (quasi-steady);
                # it enters the balance with a minus sign.
                Ix += mdot * vint * dw[0]; Iy += mdot * vint * dw[1]; Iz += mdot * vint * dw[2]
            if vin is not None:
                Ix += mdot * vin[0]; Iy += mdot * vin[1]; Iz += mdot * vin[2]
            flows.append((mdot, ve, pe, Ae, fl[4], up[0], p_in, vint, vin, rises))
        return flows, Tx, Ty, Tz, Qx, Qy, Qz, Ix, Iy, Iz

    # ------------------------------------------------------------------
    def _record(self, rec, t, s, M, e, a, drags, weight, reaction, friction, outs, flows, jet_out, supplies,
                rho, pa, Ta, wind, sp, g):
        rec.update(time=t, mass=M, axis=e, acceleration=a, weight=weight, reaction=reaction,
                   position=(s[0], s[1], s[2]), velocity=(s[3], s[4], s[5]), airspeed=sp,
                   ambient_pressure=pa, ambient_density=rho, ambient_temperature=Ta, wind=wind, gravity=g)
        ledger: list[tuple[str, str, tuple]] = []
        for k, f in drags:
            n, bf, _ = self._bodies[k]
            rec[f"{n}.{bf.force_name}"] = f
            ledger.append((n, bf.force_name, f))
        for k, (n, bf, _) in enumerate(self._bodies):
            if bf.signals is not None:
                for key, val in bf.signals(t, s, self._bmode[k]).items():
                    rec[f"{n}.{key}"] = val
        ledger.append(("vehicle", "weight", weight))
        kin = self.kinematics
        if kin != Kinematics.FREE:
            name = {Kinematics.HELD: "stand reaction", Kinematics.GUIDE: "guide reaction",
                    Kinematics.TRACK: "track reaction"}[kin]
            ledger.append(("vehicle", name, reaction))
            if self._mu > 0.0 and kin != Kinematics.HELD:
                ledger.append(("vehicle", "friction", friction))
        tvx = tvy = tvz = 0.0
        mass_flow = 0.0
        seen = set()
        for j, ln in enumerate(self._lines):
            o, dw, jd = outs[j]
            mdot, ve, pe, Ae, _c, p_start, p_in, vint, vin, rises = flows[j]
            info = self._line_info[j]
            mf = (-mdot * ve * jd[0], -mdot * ve * jd[1], -mdot * ve * jd[2])
            pth = (pe - pa) * Ae
            pf = (-pth * jd[0], -pth * jd[1], -pth * jd[2])
            ledger.append((ln.terminal, "momentum flux", mf))
            ledger.append((ln.terminal, "pressure thrust", pf))
            if info[0] and ln.vol.internal is not None:
                im = (mdot * vint * dw[0], mdot * vint * dw[1], mdot * vint * dw[2])
                ledger.append((ln.start, "internal momentum rate", im))
                _v, moving = ln.vol.internal(s, self._vmode[info[1]], mdot)
                prev = rec.get(f"{ln.start}.internal_momentum", (0.0, 0.0, 0.0))
                rec[f"{ln.start}.internal_momentum"] = (prev[0] + moving * vint * dw[0], prev[1] + moving * vint * dw[1],
                                                        prev[2] + moving * vint * dw[2])
            if vin is not None:
                ledger.append((ln.start, "inflow momentum", (mdot * vin[0], mdot * vin[1], mdot * vin[2])))
                rec[f"{ln.start}.mass_flow"] = mdot
            tvx += mf[0] + pf[0]; tvy += mf[1] + pf[1]; tvz += mf[2] + pf[2]
            mass_flow += mdot
            rec[f"{ln.terminal}.mass_flow"] = mdot
            rec[f"{ln.terminal}.exit_velocity"] = ve
            rec[f"{ln.terminal}.exit_pressure"] = pe
            rec[f"{ln.terminal}.thrust"] = mdot * ve + pth
            rec[f"{ln.terminal}.inlet_pressure"] = p_in
            rec[f"{ln.terminal}.drive"] = p_in - pa
            up = _with_pressure(o, p_start)
            for (m, fns), rise, md in zip(ln.series, rises, self._lmode[j][1]):
                rec[f"{m}.pressure_rise"] = rise
                rec[f"{m}.mass_flow"] = mdot
                if fns.signals is not None:
                    for key, val in fns.signals(up, pa, md).items():
                        rec[f"{m}.{key}"] = val
                up = _with_pressure(up, up[0] + rise)
            if ln.fl.signals is not None:
                for key, val in ln.fl.signals(_with_pressure(o, p_in), pa, self._lmode[j][0]).items():
                    rec[f"{ln.terminal}.{key}"] = val
            if ln.start in seen:
                continue
            seen.add(ln.start)
            if info[0]:
                rec[f"{ln.start}.head_pressure"] = p_start - o[0]
                rec[f"{ln.start}.outlet_pressure"] = p_start
                rec[f"{ln.start}.drive"] = p_start - pa
                for key, val in ln.vol.signals(s, self._vmode[info[1]]).items():
                    rec[f"{ln.start}.{key}"] = val
            elif ln.src.signals is not None:
                for key, val in ln.src.signals(t, s, self._smode[info[1]]).items():
                    rec[f"{ln.start}.{key}"] = val
        for k, (n, jf, _) in enumerate(self._jets):
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
            for key, val in jf.signals(t, s, self._jmode[k]).items():
                rec[f"{n}.{key}"] = val
        rec["thrust_vector"] = (tvx, tvy, tvz)
        rec["thrust"] = tvx * e[0] + tvy * e[1] + tvz * e[2]
        rec["mass_flow"] = mass_flow
        rec["ledger"] = ledger
        rec["inertia"] = (M * a[0], M * a[1], M * a[2])


def _with_pressure(up: tuple, p: float) -> tuple:
    return (p,) + tuple(up[1:])


def _solve_line(ln, up, pa, tmode, smodes, mfix):
    """Mass flow through elements in series: the flow the terminal element passes at the pressure the series
    elements deliver at that same flow (scalar root). A source that fixes the flow sets it instead, and the
    pressure at the terminal element is whatever passes that flow."""

    def after(mdot):
        cur = up
        rises = []
        for (m, fns), md in zip(ln.series, smodes):
            r = fns.rise(cur, mdot, md)
            rises.append(r)
            cur = _with_pressure(cur, cur[0] + r)
        return cur, tuple(rises)

    if mfix >= 0.0:
        cur, rises = after(mfix)
        if mfix == 0.0:
            return _ZERO_FLOW, cur[0], rises
        # the supply delivers mfix: find the terminal inlet pressure that passes it
        lo, hi = pa, max(pa * 2.0, 1e5) + pa
        while ln.fl.flow(_with_pressure(cur, hi), pa, tmode)[0] < mfix:
            hi = 2.0 * hi
            if hi > 1e12:
                raise IntegrationError(f"components.{ln.terminal}: cannot pass the flow its supply fixes "
                                       f"({mfix:.4g} kg/s)")
        p = brentq(lambda p: ln.fl.flow(_with_pressure(cur, p), pa, tmode)[0] - mfix, lo, hi,
                   xtol=1e-12, rtol=1e-13)
        # what enters leaves: the line passes exactly the flow its supply fixes (not the root's last digit)
        return (mfix,) + tuple(ln.fl.flow(_with_pressure(cur, p), pa, tmode)[1:]), p, rises

    def gap(mdot):
        cur, _ = after(mdot)
        return ln.fl.flow(cur, pa, tmode)[0] - mdot

    g0 = gap(0.0)
    if g0 <= 0.0:
        cur, rises = after(0.0)
        return ln.fl.flow(cur, pa, tmode), cur[0], rises
    hi = max(g0, 1e-6)
    while gap(hi) > 0.0:
        hi *= 2.0
        if hi > 1e9:
            raise IntegrationError(f"components.{ln.terminal}: the line's mass flow has no finite solution")
    mdot = brentq(gap, 0.0, hi, xtol=1e-14, rtol=1e-13)
    cur, rises = after(mdot)
    fl = ln.fl.flow(cur, pa, tmode)
    return (mdot,) + tuple(fl[1:]), cur[0], rises


_SINGULAR = ("the liquid head makes the acceleration undetermined (the nozzle is too large for the vessel's "
             "bore under the quasi-steady model). Fix: use a vessel bore larger than about 1.5 times the "
             "nozzle diameter")
