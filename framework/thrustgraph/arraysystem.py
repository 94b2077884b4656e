"""N designs of one model assembled as arrays, and the vectorised momentum balance over them.

:class:`ArraySystem` is the array twin of :class:`thrustgraph.assembly.System`
plus :class:`thrustgraph.balance.Balance` for the family the vectorised
ensemble flies: bodies without states, vessels discharging straight through
one element to the outside along the body axis, a medium and a gravity field,
on a launch guide or free. Every number that differs between designs is a
numpy array of shape ``(N,)``; the component kinds build their callables with
:data:`thrustgraph.arrayops.array_ops` (so the physics still comes from the
plugins, and this module knows no device). The discrete phase is explicit
per design: the mode of every moded component (integer arrays) and the
kinematic constraint (guide or free).

The balance follows :mod:`thrustgraph.balance` term by term: weight, drag,
thrust ``mdot v_e + (p_e - p_a) A_e`` of each line along the axis, the
internal-momentum term, and the liquid head in the accelerating frame solved
with the acceleration by one Newton step from ``a = 0`` (exact when the thrust
is affine in the outlet pressure, as for the quasi-steady Bernoulli jet; three
steps when a vessel adds its internal momentum). On the guide, the
acceleration is along the guide, with friction and the hold at its foot.

Examples
--------
>>> import numpy as np
>>> from thrustgraph.modelfile import load_model, default_model_path
>>> from thrustgraph.model import parse_model
>>> from thrustgraph.designs import resolve
>>> parsed = parse_model(load_model(default_model_path()))
>>> fill = resolve(parsed, "components.bottle.fill")
>>> sysa = ArraySystem(parsed, [fill], np.array([[0.2], [0.33]]))
>>> sysa.n, sysa.state_names[6:8]
(2, ('bottle.liquid_mass', 'bottle.gas_mass'))
>>> d, aux = sysa.rhs(np.zeros(2), sysa.y0, sysa.mode0, sysa.kin0)
>>> bool(np.all(d[3] > 0))                   # both accelerate up the guide at launch
True
"""

from __future__ import annotations

import dataclasses
from typing import Any, Sequence

import numpy as np

from .arrayops import array_ops, vectorised
from .assembly import KINEMATIC
from .balance import Kinematics
from .component import Ambient
from .designs import DesignParameter, with_values
from .model import ParsedModel

__all__ = ["ArraySystem", "Phase", "unsupported", "IMPULSE", "GUIDE", "FREE"]

GUIDE, FREE = Kinematics.GUIDE, Kinematics.FREE
#: Name of the quadrature state the ensemble adds: the time integral of the thrust magnitude.
IMPULSE = "ensemble.impulse"
_AFT = (-1.0, 0.0, 0.0)


def unsupported(parsed: ParsedModel) -> str | None:
    """Why the vectorised ensemble cannot fly a model, or None when it can."""
    if parsed.launch.mount not in ("guide", "free"):
        return f"launch.mount {parsed.launch.mount!r} (the ensemble flies guide and free launches)"
    if parsed.stages or parsed.triggers:
        return "stages and triggers"
    for slot, cls in parsed.env_kinds.items():
        if not vectorised(cls):
            return f"environment.{slot} kind {cls.kind!r} builds no array callables"
    g = parsed.graph
    for n, cls in parsed.kinds.items():
        if not vectorised(cls):
            return f"components.{n} kind {cls.kind!r} builds no array callables"
        if cls.role in ("jet", "source"):
            return f"components.{n} is a {cls.role}"
        if cls.role == "body" and cls.states:
            return f"components.{n} is a body with states"
        if cls.role == "volume":
            p = parsed.params[n]
            if tuple(getattr(p, "outlet_direction", _AFT)) != _AFT:
                return f"components.{n} has an outlet off the body axis"
            for m in g.successors(n):
                if parsed.kinds[m].role != "flow" or any(parsed.kinds[k].role != "boundary" for k in g.successors(m)):
                    return f"components.{n} discharges through elements in series"
        if cls.role == "flow" and tuple(getattr(parsed.params[n], "direction", _AFT)) != _AFT:
            return f"components.{n} jets off the body axis"
    return None


def _vary(p: Any, changes: dict[str, np.ndarray]) -> Any:
    return dataclasses.replace(p, **changes) if changes else p


@dataclasses.dataclass(frozen=True)
class Phase:
    """The discrete phase of the designs as :meth:`ArraySystem.rhs` uses it: which are free, whether all are,
    whether any is, each vessel's mode (an ``int`` when shared by every design) and whether it is quiet in every
    design."""

    free: np.ndarray
    all_free: bool
    vmode: list
    quiet: list
    any_free: bool


class ArraySystem:
    """N designs of one parsed model: state layout, initial states and modes, and the vectorised balance.

    Parameters
    ----------
    parsed : the base model
    params : the varied parameters
    x : their SI values, shape (N, parameters)
    initial : also compute the initial states and modes per design (False for the subsets the integrator
        builds: their ``y0`` is None)
    """

    def __init__(self, parsed: ParsedModel, params: Sequence[DesignParameter], x: np.ndarray, *,
                 initial: bool = True) -> None:
        x = np.asarray(x, dtype=float).reshape(-1, len(params))
        self.parsed, self.params, self.x = parsed, tuple(params), x
        n = self.n = len(x)
        comp: dict[str, dict[str, np.ndarray]] = {}
        env: dict[str, dict[str, np.ndarray]] = {}
        launch: dict[str, np.ndarray] = {}
        for j, p in enumerate(params):
            col = x[:, j].copy()
            if p.section == "components":
                comp.setdefault(p.owner, {})[p.name] = col
            elif p.section == "environment":
                env.setdefault(p.owner, {})[p.name] = col
            else:
                launch[p.name] = col
        self._comp_changes = comp
        self.kp = {nm: _vary(parsed.params[nm], comp.get(nm, {})) for nm in parsed.model.components}
        self.ep = {slot: _vary(parsed.env_params[slot], env.get(slot, {})) for slot in parsed.env_params}
        L = _vary(parsed.launch, launch)
        self.launch = L
        medium = parsed.env_kinds["medium"].build(self.ep["medium"], array_ops)
        gravity = parsed.env_kinds["gravity"].build(self.ep["gravity"], array_ops)
        self.medium, self.gravity = medium, gravity
        alt = np.broadcast_to(np.asarray(L.altitude, dtype=float), (n,))
        rho, pa, Ta, *_ = medium(alt, np.zeros(n))
        amb = Ambient(pressure=pa, temperature=Ta, density=rho)
        self.amb = amb
        el, az = np.asarray(L.elevation, dtype=float), np.asarray(L.azimuth, dtype=float)
        ce = np.cos(el)
        u = [ce * np.cos(az), ce * np.sin(az), np.sin(el)]
        # cos(pi/2) is 6e-17: keep a vertical guide exactly vertical, as the scalar assembly does
        self.u = tuple(np.broadcast_to(np.where(np.abs(c) < 1e-15, 0.0, c), (n,)).copy() for c in u)
        self.guide_length = np.broadcast_to(np.asarray(L.guide_length, dtype=float), (n,)).copy()
        self.mu = L.friction
        self.follow = L.attitude == "follow-wind"
        self.vmin = np.maximum(np.asarray(L.min_follow_speed, dtype=float), 1e-9)
        self.x0 = (np.zeros(n), np.zeros(n), alt.copy())

        # State layout: kinematics, component states in file order, then the impulse quadrature.
        names = list(KINEMATIC)
        order = list(parsed.model.components)
        slices: dict[str, tuple[int, int]] = {}
        y0 = [np.zeros(n), np.zeros(n), alt.copy()]
        sp = np.broadcast_to(np.asarray(L.speed, dtype=float), (n,))
        y0 += [sp * self.u[0], sp * self.u[1], sp * self.u[2]]
        self.moded: list[str] = []
        self.modes: dict[str, tuple] = {}
        for nm in order:
            cls = parsed.kinds[nm]
            if cls.states:
                slices[nm] = (len(names), len(cls.states))
                names.extend(f"{nm}.{sv.name}" for sv in cls.states)
                if initial:     # the subsets the integrator builds carry no initial state
                    init = cls.initial_state(self.kp[nm], amb)
                    y0.extend(np.broadcast_to(np.asarray(v, dtype=float), (n,)).copy() for v in init)
            if cls.modes:
                self.moded.append(nm)
                self.modes[nm] = cls.modes
        names.append(IMPULSE)
        y0.append(np.zeros(n))
        self.state_names = tuple(names)
        self.slices = slices
        self.y0 = np.array(y0) if initial else None
        self.kin0 = np.full(n, FREE if parsed.launch.mount == "free" else GUIDE, dtype=np.int8)
        self.mode0 = np.zeros((len(self.moded), n), dtype=np.int8)
        if initial:
            self._initial_modes()

        self._build()

    def _build(self) -> None:
        """The callables from the plugins, built over this system's arrays of designs, and what the balance
        reads of their structure."""
        parsed = self.parsed
        self.fixed_mass: Any = 0.0
        self.bodies, self.volumes, flows = [], [], {}
        self.events = []
        for nm in parsed.model.components:
            cls, p = parsed.kinds[nm], self.kp[nm]
            i = self.slices.get(nm, (-1, 0))[0]
            if cls.role == "body":
                b = cls.build_body(p, array_ops)
                self.fixed_mass = self.fixed_mass + b.mass
                if b.force is not None:
                    self.bodies.append((nm, b))
            elif cls.role == "volume":
                v = cls.build_volume(p, i, array_ops, self.amb)
                self.volumes.append((nm, v))
                self.events.extend((nm, e) for e in v.events)
            elif cls.role == "flow":
                f = cls.build_flow(p, array_ops)
                flows[nm] = f
                self.events.extend((nm, e) for e in f.events)
        slot = {nm: k for k, nm in enumerate(self.moded)}
        self.slot = slot
        self.lines = []   # (volume index, volume slot, terminal name, terminal slot, FlowFns)
        vindex = {nm: k for k, (nm, _) in enumerate(self.volumes)}
        for nm, _ in self.volumes:
            for m in parsed.graph.successors(nm):
                self.lines.append((vindex[nm], slot.get(nm, -1), m, slot.get(m, -1), flows[m]))
        self.internal = any(v.internal is not None for _, v in self.volumes)
        self.newton = 3 if self.internal else 1
        self._friction = bool(np.any(np.asarray(self.mu) > 0.0))
        # per vessel and mode: True where it promises no outflow (Mode.outflow, as the single-flight kernel
        # reads it) and watches no drive, so that its outlet need not be evaluated either
        self._quiet = []
        for nm, v in self.volumes:
            ms = self.modes.get(nm, ())
            watch = {w for e in v.events if e.needs_drive for w in e.when}
            self._quiet.append(np.array([not m.outflow and m.name not in watch for m in ms] or [False]))

    # ------------------------------------------------------------------
    def _initial_modes(self) -> None:
        """Initial mode of each moded component, per design (kinds decide it from scalar parameters)."""
        parsed = self.parsed
        for k, nm in enumerate(self.moded):
            cls = parsed.kinds[nm]
            names = [m.name for m in cls.modes]
            changes = self._comp_changes.get(nm, {})
            if not changes and not any(p.section != "components" for p in self.params):
                self.mode0[k, :] = names.index(cls.initial_mode(parsed.params[nm], parsed.ambient))
                continue
            base = parsed.params[nm]
            pa, Ta, rho = (np.broadcast_to(np.asarray(v, dtype=float), (self.n,))
                           for v in (self.amb.pressure, self.amb.temperature, self.amb.density))
            fields = list(changes)
            # the kind is asked once per distinct row of (its varied fields, ambient): a grid repeats them
            rows = np.column_stack([changes[f] for f in fields] + [pa, Ta, rho])
            uniq, inverse = np.unique(rows, axis=0, return_inverse=True)
            picked = np.empty(len(uniq), dtype=np.int8)
            for u, row in enumerate(uniq):
                p = with_values(base, {f: float(v) for f, v in zip(fields, row)}) if fields else base
                amb = Ambient(pressure=float(row[-3]), temperature=float(row[-2]), density=float(row[-1]))
                picked[u] = names.index(cls.initial_mode(p, amb))
            self.mode0[k, :] = picked[inverse.reshape(-1)]

    def subset(self, idx: np.ndarray) -> "ArraySystem":
        """The same model for some of the designs (rows ``idx``), for compaction and event location.

        The same system as ``ArraySystem(parsed, params, x[idx], initial=False)`` (no initial states),
        made by taking rows of this one's per-design arrays and building only the plugins' callables anew
        (the integrator asks for a subset at most steps: one per step with events).
        """
        idx = np.asarray(idx)
        if any(p.section != "components" for p in self.params):   # varied environment or launch
            return ArraySystem(self.parsed, self.params, self.x[idx], initial=False)
        new = object.__new__(ArraySystem)
        new.__dict__.update(self.__dict__)        # the state layout, modes and launch are shared
        new.x = self.x[idx]
        n = new.n = len(new.x)
        new._comp_changes = {nm: {f: v[idx] for f, v in ch.items()} for nm, ch in self._comp_changes.items()}
        new.kp = {nm: _vary(self.parsed.params[nm], new._comp_changes[nm]) if nm in new._comp_changes else p
                  for nm, p in self.kp.items()}
        a = self.amb
        new.amb = Ambient(*(v[idx] if np.ndim(v) else v for v in (a.pressure, a.temperature, a.density)))
        new.u = tuple(c[idx] for c in self.u)
        new.guide_length = self.guide_length[idx]
        new.x0 = tuple(c[idx] for c in self.x0)
        new.y0 = None
        new.kin0 = np.full(n, FREE if self.parsed.launch.mount == "free" else GUIDE, dtype=np.int8)
        new.mode0 = np.zeros((len(self.moded), n), dtype=np.int8)
        new._build()
        return new

    def index(self, name: str) -> int:
        return self.state_names.index(name)

    def propulsive(self, modes: np.ndarray) -> np.ndarray:
        """True per design where some component is in a propulsive mode."""
        out = np.zeros(modes.shape[1], dtype=bool)
        for k, nm in enumerate(self.moded):
            flags = np.array([m.propulsive for m in self.modes[nm]])
            out |= flags[modes[k]]
        return out

    def masses(self, Y: np.ndarray) -> np.ndarray:
        s = list(Y)
        M = self.fixed_mass + 0.0 * s[0]
        for _, v in self.volumes:
            M = M + v.mass(s)
        return M

    def pressures(self, Y: np.ndarray, modes: np.ndarray) -> np.ndarray | None:
        """Largest vessel pressure per design (Pa), or None without vessels."""
        s = list(Y)
        best = None
        for nm, v in self.volumes:
            mode = modes[self.slot[nm]] if nm in self.slot else 0
            p = v.signals(s, mode).get("pressure")
            if p is not None:
                best = p if best is None else np.maximum(best, p)
        return best

    def phase(self, modes: np.ndarray, kin: np.ndarray) -> "Phase":
        """What :meth:`rhs` reads of the discrete phase, worked out once (a step's stages share it).

        A vessel's mode is passed to its callables as an ``int`` when every design shares it (so a kind can
        skip its per-design selections), else as the integer array.
        """
        free = kin == FREE
        vmode: list[Any] = []
        for nm, _ in self.volumes:
            if nm not in self.slot:
                vmode.append(0)
                continue
            m = modes[self.slot[nm]]
            lo, hi = int(m.min()), int(m.max())
            vmode.append(lo if lo == hi else m)
        quiet = [self._all_quiet(k, vmode[k]) for k in range(len(self.volumes))]
        return Phase(free, bool(free.all()), vmode, quiet, bool(free.any()))

    def frozen(self, modes: np.ndarray) -> bool:
        """Whether every vessel is quiet in every design: :meth:`rhs` then holds their states (zero
        derivatives), so nothing a vessel reports (pressure...) can change."""
        return all(self._all_quiet(k, modes[self.slot[nm]] if nm in self.slot else 0)
                   for k, (nm, _) in enumerate(self.volumes))

    def _all_quiet(self, k: int, mode: Any) -> bool:
        """Whether vessel ``k`` is in a quiet mode (no outflow, no watched drive) in every design."""
        q = self._quiet[k]
        if not q.any():
            return False
        if np.ndim(mode) == 0:
            return bool(q[int(mode)])
        lo, hi = int(mode.min()), int(mode.max())
        if q[lo:hi + 1].all():
            return True
        return False if lo == hi else bool(np.all(q[mode]))

    def drives(self, t: np.ndarray, Y: np.ndarray, phase: "Phase") -> dict | None:
        """``aux["drive"]`` of :meth:`rhs` where it does not depend on the acceleration, else None.

        A line's drive is its upstream pressure less ambient, ``p - head (f . e) - pa``: without a liquid
        head in any design (a gas-phase vessel) it is ``p - pa``, the same numbers as :meth:`rhs` gives,
        from the outlets alone (event location calls this many times per step).
        """
        s = list(Y)
        _, pa, *_ = self.medium(s[2], t)
        vmode = phase.vmode
        outs: dict[int, tuple] = {}
        drive: dict[str, Any] = {}
        for (vi, _vs, tn, _ts, _fl) in self.lines:
            if phase.quiet[vi]:
                continue
            o = outs.get(vi)
            if o is None:
                o = outs[vi] = self.volumes[vi][1].outlet(s, vmode[vi])
                if np.any(o[6] != 0.0):
                    return None
            d = o[0] - pa
            drive.setdefault(self.volumes[vi][0], d)
            drive[tn] = d
        return drive

    # ------------------------------------------------------------------
    def rhs(self, t: np.ndarray, Y: np.ndarray, modes: np.ndarray, kin: np.ndarray,
            out: np.ndarray | None = None, phase: "Phase | None" = None, aux: bool = True
            ) -> tuple[np.ndarray, dict | None]:
        """Derivatives of the states (shape of ``Y``, written into ``out`` when given) and, in ``aux``:
        ``drive`` (name -> Pa), ``accel`` (acceleration magnitude), ``thrust`` (thrust magnitude), ``mass``
        and ``singular`` (designs whose head coupling has no solution); ``aux=False`` skips those (None
        instead), for the inner stages of a step, which use the derivatives alone.

        A vessel whose every design is in a mode that cannot push (``Mode.propulsive`` false) and watches
        no drive in it passes no flow, so its lines are not evaluated. ``phase`` is
        :meth:`phase` of ``modes`` and ``kin`` (worked out here when not given).
        """
        if phase is None:
            phase = self.phase(modes, kin)
        s = list(Y)
        x, y, z, vx, vy, vz = s[:6]
        rho, pa, Ta, wx, wy, wz = self.medium(z, t)
        g = self.gravity(z)
        vrx, vry, vrz = vx - wx, vy - wy, vz - wz
        sp = np.sqrt(vrx * vrx + vry * vry + vrz * vrz)
        free, all_free = phase.free, phase.all_free
        ux, uy, uz = self.u
        if self.follow:
            use = free & (sp > self.vmin)
            if use.all():      # the common case in flight: the same numbers without the selections
                ex, ey, ez = vrx / sp, vry / sp, vrz / sp
            else:
                d = np.where(use, sp, 1.0)
                ex, ey, ez = np.where(use, vrx / d, ux), np.where(use, vry / d, uy), np.where(use, vrz / d, uz)
        else:
            ex, ey, ez = ux, uy, uz
        M = self.fixed_mass
        for _, v in self.volumes:
            M = M + v.mass(s)
        air = (rho, pa, Ta, vrx, vry, vrz, sp)
        Fx = Fy = 0.0
        Fz = -M * g
        for _, b in self.bodies:
            f = b.force(air)
            Fx, Fy, Fz = Fx + f[0], Fy + f[1], Fz + f[2]
        vmode, quiet = phase.vmode, phase.quiet
        outs = [None if quiet[k] else v.outlet(s, vmode[k]) for k, (_, v) in enumerate(self.volumes)]
        lines = [ln for ln in self.lines if not quiet[ln[0]]]

        def flows_at(fe):
            """Flows of every line at f.e (apparent acceleration along the axis): T along +e, I (internal)."""
            res = []
            T = 0.0
            I = 0.0
            beta = 0.0
            for (vi, _vs, _tn, ts, fl) in lines:
                o = outs[vi]
                head = o[6]
                if type(head) is float and head == 0.0:    # no liquid head in any design: p_up = p exactly
                    p_up, up = o[0], o
                else:
                    p_up = o[0] - head * fe   # head (f . d) with d = -e (outlet aft)
                    up = (p_up,) + tuple(o[1:])
                mdot, ve, pe, Ae, c = fl.flow(up, pa, modes[ts] if ts >= 0 else 0)
                T = T + mdot * ve + (pe - pa) * Ae
                vol = self.volumes[vi][1]
                if vol.internal is not None:
                    vint, _ = vol.internal(s, vmode[vi], mdot)
                    I = I + mdot * vint
                if not (type(head) is float and head == 0.0):
                    beta = beta + c * head
                res.append((mdot, p_up))
            return res, T, I, beta

        # flows at a = 0: f = g_vec, f.e = -g ez
        fe0 = -g * ez
        res, T, I, beta = flows_at(fe0)
        coupled = bool(np.any(beta != 0.0)) if lines else False
        res0, T0, I0, beta0 = res, T, I, beta
        # applied force at the current a: G = F + (T - I) e
        TI = T - I
        Gx, Gy, Gz = Fx + TI * ex, Fy + TI * ey, Fz + TI * ez
        singular = np.zeros(self.n, dtype=bool)
        # free flight: Newton on M a - G(a) = 0 with J = M I - beta e e^T, from a = 0 (not solved while every
        # design is on the guide: the guide's acceleration below replaces it in every design)
        if not phase.any_free:
            ax = ay = az = 0.0
        elif coupled:
            ax = ay = az = 0.0
            for it in range(self.newton):
                den = M - beta
                singular = singular | (free & (den <= 1e-12 * M))
                rx, ry, rz = M * ax - Gx, M * ay - Gy, M * az - Gz
                re = rx * ex + ry * ey + rz * ez
                k = beta / np.where(den > 0.0, M * den, 1.0)
                ax, ay, az = ax - (rx / M + k * re * ex), ay - (ry / M + k * re * ey), az - (rz / M + k * re * ez)
                if it + 1 < self.newton:
                    res, T, I, beta = flows_at(fe0 - (ax * ex + ay * ey + az * ez))
                    TI = T - I
                    Gx, Gy, Gz = Fx + TI * ex, Fy + TI * ey, Fz + TI * ez
        else:
            ax, ay, az = Gx / M, Gy / M, Gz / M
        # on the guide: a = alpha u, from a = 0 (the scalar loop: one step, then its residual check)
        if not all_free:
            TI0 = T0 - I0
            G0x, G0y, G0z = Fx + TI0 * ex, Fy + TI0 * ey, Fz + TI0 * ez
            Gu = G0x * ux + G0y * uy + G0z * uz
            v_along = vx * ux + vy * uy + vz * uz
            at_foot = (v_along <= 0.0) & ((x - self.x0[0]) * ux + (y - self.x0[1]) * uy
                                          + (z - self.x0[2]) * uz <= 0.0)
            fr = 0.0
            if self._friction:
                nx_, ny_, nz_ = G0x - Gu * ux, G0y - Gu * uy, G0z - Gu * uz
                fmax = self.mu * np.sqrt(nx_ * nx_ + ny_ * ny_ + nz_ * nz_)
                fr = np.where(v_along > 0.0, -fmax, np.where(v_along < 0.0, fmax, np.clip(-Gu, -fmax, fmax)))
            # on the guide e = u, so J = M - beta (e . u)^2 = M - beta
            J = M - beta0
            singular = singular | (~free & (J <= 0.0))
            alpha = (Gu + fr) / np.where(J > 0.0, J, 1.0)
            alpha = np.where((alpha < 0.0) & at_foot, 0.0, alpha)
            ax = np.where(free, ax, alpha * ux)
            ay = np.where(free, ay, alpha * uy)
            az = np.where(free, az, alpha * uz)
        # final flows at the chosen acceleration (the derivatives use these); without a liquid head the
        # flows do not depend on the acceleration
        if coupled:
            res, T, I, beta = flows_at(fe0 - (ax * ex + ay * ey + az * ez))
        else:
            res, T, I = res0, T0, I0
        if out is None:
            out = np.empty_like(Y)
        out[0:3] = Y[3:6]
        out[3], out[4], out[5] = ax, ay, az
        vol_out = [0.0] * len(self.volumes)
        for (vi, *_), (mdot, _p) in zip(lines, res):
            vol_out[vi] = vol_out[vi] + mdot
        for k, (nm, v) in enumerate(self.volumes):
            i0, cnt = self.slices[nm]
            if quiet[k]:
                out[i0:i0 + cnt] = 0.0
                continue
            ds = v.derivs(s, vmode[k], vol_out[k])
            for q in range(cnt):
                out[i0 + q] = ds[q]
        thrust = out[-1] = np.abs(T)
        if not aux:
            return out, None
        drive: dict[str, Any] = {}
        for (vi, _vs, tn, _ts, _fl), (mdot, p_up) in zip(lines, res):
            drive.setdefault(self.volumes[vi][0], p_up - pa)
            drive[tn] = p_up - pa
        accel = np.sqrt(ax * ax + ay * ay + az * az)
        return out, {"drive": drive, "accel": accel, "thrust": thrust, "mass": M, "singular": singular}
