"""Per-phase generated right-hand sides: the balance of :mod:`thrustgraph.balance`, specialised and unrolled.

:class:`~thrustgraph.balance.Balance` holds the general balance: loops over the
vehicle's bodies, jets, vessels and lines, branches on the kinematic constraint,
and the bookkeeping that feeds the ledger. Within one integration segment most
of that is fixed: which components exist, their modes, the constraint, which
directions are aft. This module writes, for one vehicle in one phase, the same
arithmetic as straight-line Python with the loops unrolled and the fixed branches
taken, and compiles it. The components' callables are still called (the core knows
no device physics); only the core's own overhead goes.

The generated function computes the same floating-point operations in the same
order as ``Balance._balance``, so the two agree to the last bit; a test checks
that on every bundled model in every phase it reaches. ``Balance.evaluate`` (the
ledger) stays on the general path.

Generated source depends only on the vehicle's structure, never on its values
(those are passed in the function's namespace), so the compiled code is shared
by every vehicle of the same structure in the process: a loop of single flights
over designs compiles each phase once.

Examples
--------
>>> from thrustgraph.modelfile import load_model, default_model_path
>>> from thrustgraph.assembly import assemble
>>> from thrustgraph.balance import Balance
>>> bal = Balance(assemble(load_model(default_model_path())))
>>> fast, _core, _drives = phase_functions(bal)
>>> fast(0.0, list(bal.system.y0)) == bal.reference_rhs(0.0, list(bal.system.y0))
True
"""

from __future__ import annotations

import math
from collections import OrderedDict
from typing import Any, Callable

from .errors import IntegrationError
from .vectors import body_frame, solve_rank_one, to_world

__all__ = ["phase_functions", "phase_source"]

_CODE_CACHE: "OrderedDict[tuple, Any]" = OrderedDict()
_CODE_CACHE_SIZE = 512


class _Src:
    """Lines of Python source with indentation."""

    def __init__(self) -> None:
        self.lines: list[str] = []
        self.ind = 0

    def __call__(self, *lines: str) -> None:
        for ln in lines:
            self.lines.append("    " * self.ind + ln)

    def block(self) -> "_Src":
        return self

    def __enter__(self) -> None:
        self.ind += 1

    def __exit__(self, *exc: Any) -> None:
        self.ind -= 1

    def text(self) -> str:
        return "\n".join(self.lines) + "\n"


def _structure(bal) -> tuple:
    """What the generated source depends on: the vehicle's structure in the current phase, no values."""
    return (getattr(bal.system.medium, "uniform", None) is not None,
            getattr(bal.system.gravity, "uniform", None) is not None, bal.kinematics, bal._follow, bal._need_frame, len(bal._mass_fns),
            tuple((k, stateful) for k, stateful, _ in bal._force_fns), tuple(bal._jet_aft), len(bal._vols),
            len(bal._srcs), tuple((i[0], i[1], i[4], i[5]) for i in bal._line_info),
            tuple((rt[3], rt[4] is not None, rt[5] is not None) for rt in bal._line_rt), tuple(bal._owners),
            tuple((ln.start, ln.terminal) for ln in bal._lines), bal._mu > 0.0, bal.slide, tuple(_idle_lines(bal)))


def _idle_lines(bal) -> list[bool]:
    """Per line: does a component on it sit in a mode that promises no outflow (Mode.outflow=False)?"""
    sysm = bal.system
    current = {n: sysm.modes[n][bal.modes[k]] for k, n in enumerate(sysm.moded)}
    out = []
    for ln in bal._lines:
        names = [ln.start, ln.terminal] + [m for m, _ in ln.series]
        out.append(any(n in current and not current[n].outflow for n in names))
    return out


def _namespace(bal) -> dict[str, Any]:
    """The values and callables the generated source refers to by name."""
    from .balance import _SINGULAR, _solve_line

    sysm = bal.system
    ns: dict[str, Any] = {"sqrt": math.sqrt, "body_frame": body_frame, "to_world": to_world,
                          "solve_rank_one": solve_rank_one, "IntegrationError": IntegrationError,
                          "_SINGULAR": _SINGULAR, "_solve_line": _solve_line, "medium": sysm.medium,
                          "gravity": sysm.gravity, "MEDIUM_U": getattr(sysm.medium, "uniform", None),
                          "GRAVITY_U": getattr(sysm.gravity, "uniform", None), "FIXED": sysm.fixed_mass, "MAXN": bal.max_newton,
                          "U0": bal._u[0], "U1": bal._u[1], "U2": bal._u[2], "AZ": bal._az, "MU": bal._mu,
                          "VMIN": bal._vmin, "X00": bal._x0[0], "X01": bal._x0[1], "X02": bal._x0[2]}
    for k, fn in enumerate(bal._mass_fns):
        ns[f"mass{k}"] = fn
    for k, (_, bf, _) in enumerate(bal._bodies):
        ns[f"force{k}"] = bf.force_state or bf.force
        ns[f"bderivs{k}"] = bf.derivs
        ns[f"BMODE{k}"] = bal._bmode[k]
    for k, (_, jf, _) in enumerate(bal._jets):
        ns[f"jet{k}"], ns[f"jderivs{k}"], ns[f"JDIR{k}"], ns[f"JMODE{k}"] = jf.jet, jf.derivs, jf.jet_dir, \
            bal._jmode[k]
    for k, (_, vf, _) in enumerate(bal._vols):
        ns[f"outlet{k}"], ns[f"vderivs{k}"], ns[f"VMODE{k}"] = vf.outlet, vf.derivs, bal._vmode[k]
    for k, (_, sf, _) in enumerate(bal._srcs):
        ns[f"supply{k}"], ns[f"SMODE{k}"] = sf.supply, bal._smode[k]
    for j, (info, rt) in enumerate(zip(bal._line_info, bal._line_rt)):
        ln = rt[6]
        ns[f"ODIR{j}"], ns[f"LJDIR{j}"], ns[f"flow{j}"], ns[f"LN{j}"] = info[6], ln.fl.jet_dir, rt[2], ln
        ns[f"TMODE{j}"], ns[f"SMODES{j}"] = bal._lmode[j]
        ns[f"internal{j}"], ns[f"inflow{j}"] = rt[4], rt[5]
    return ns


def phase_source(bal) -> str:
    """Python source of the current phase's right-hand side and drives.

    ``bal`` is a :class:`~thrustgraph.balance.Balance` whose phase is set. The source defines
    ``rhs(t, y)`` (derivatives, a list), ``core(t, y)`` (the same without the audit accumulators: the
    derivatives of the physical states only) and ``drives(t, y)`` (the drive pressures the events read); the names
    it uses are filled in by :func:`_namespace`. Terms that are zero by structure in this phase (pressure
    thrust without jets, internal and inflow momentum without such lines, friction without a friction
    coefficient) are left out; adding an exact zero changes no value.
    """
    from .balance import Kinematics

    kin = bal.kinematics
    w = _Src()
    vols, jets, srcs = bal._vols, bal._jets, bal._srcs
    line_info, line_rt = bal._line_info, bal._line_rt
    nlines = len(line_info)
    guided = kin in (Kinematics.GUIDE, Kinematics.TRACK)
    has_p = bool(jets)
    has_i = any(rt[4] is not None or not info[0] for info, rt in zip(line_info, line_rt))
    has_c = guided and bal._mu > 0.0
    aft = ("ax_", "ay_", "az_")
    idle = _idle_lines(bal)
    uni_m = getattr(bal.system.medium, "uniform", None) is not None
    uni_g = getattr(bal.system.gravity, "uniform", None) is not None
    dwn = [aft if info[4] else (f"dw{j}x", f"dw{j}y", f"dw{j}z") for j, info in enumerate(line_info)]
    jdn = [aft if info[5] else (f"jd{j}x", f"jd{j}y", f"jd{j}z") for j, info in enumerate(line_info)]

    def body(kind: str) -> None:
        # lines that cannot flow in this phase (a component on them in a mode with outflow=False) are left out of
        # the derivatives; the drives still see every line's pressures
        live = [kind == "drives" or not idle[j] for j in range(nlines)]
        w("try:", "    s = y.tolist()", "except AttributeError:", "    s = list(y)",
          "vx = s[3]; vy = s[4]; vz = s[5]",
          "rho, pa, Ta, wx, wy, wz = MEDIUM_U" if uni_m else "rho, pa, Ta, wx, wy, wz = medium(s[2], t)",
          "g = GRAVITY_U" if uni_g else "g = gravity(s[2])",
          "vrx = vx - wx; vry = vy - wy; vrz = vz - wz",
          "sp = sqrt(vrx * vrx + vry * vry + vrz * vrz)")
        if bal._follow and kin == Kinematics.FREE:
            w("if sp > VMIN:", "    e0 = vrx / sp; e1 = vry / sp; e2 = vrz / sp",
              "else:", "    e0 = U0; e1 = U1; e2 = U2")
        else:
            w("e0 = U0; e1 = U1; e2 = U2")
        if bal._need_frame:
            w("frame = body_frame((e0, e1, e2), AZ)")
        w("ax_ = -e0; ay_ = -e1; az_ = -e2")
        # mass and the acceleration-independent forces
        w("M = " + " + ".join(["FIXED"] + [f"mass{k}(s)" for k in range(len(bal._mass_fns))]))
        w("air = (rho, pa, Ta, vrx, vry, vrz, sp)")
        if not bal._force_fns:
            w("Dx = Dy = Dz = 0.0")
        for n, (k, stateful, _fn) in enumerate(bal._force_fns):
            call = f"force{k}(t, s, BMODE{k}, air)" if stateful else f"force{k}(air)"
            if n == 0:   # 0.0 + f == f: the first force starts the sums
                w(f"Dx, Dy, Dz = {call}")
            else:
                w(f"f = {call}", "Dx += f[0]; Dy += f[1]; Dz += f[2]")
        acc = kind == "rhs"    # the audit accumulators' derivatives ("core" and "drives" leave them out)
        w("Wz = -M * g", "Fx = Dx; Fy = Dy; Fz = Dz + Wz")
        if acc:
            w("mout = 0.0", "Ex = Ey = Ez = 0.0")
        if has_p and acc:
            w("Px = Py = Pz = 0.0")
        for k, (_, jf, _) in enumerate(jets):
            w(f"jm{k}, ve, pe, Ae = jet{k}(t, s, JMODE{k}, pa)")
            if bal._jet_aft[k]:
                w("j0 = ax_; j1 = ay_; j2 = az_")
            else:
                w(f"j0, j1, j2 = to_world(JDIR{k}, frame)")
            w("pth = (pe - pa) * Ae", f"T = jm{k} * ve + pth",
              "Fx -= T * j0; Fy -= T * j1; Fz -= T * j2")
            if acc:
                w("Px -= pth * j0; Py -= pth * j1; Pz -= pth * j2",
                  f"mout += jm{k}",
                  f"Ex += jm{k} * (vx + ve * j0); Ey += jm{k} * (vy + ve * j1); Ez += jm{k} * (vz + ve * j2)")
        for k in range(len(vols)):
            if any(live[j] and info[0] and info[1] == k for j, info in enumerate(line_info)):
                w(f"vo{k} = outlet{k}(s, VMODE{k})")
        for k in range(len(srcs)):
            w(f"su{k} = supply{k}(t, s, SMODE{k}, air)")
        coupled = []
        for j, info in enumerate(line_info):
            isvol, idx = info[0], info[1]
            if not live[j]:
                w(f"m{j} = 0.0; ve{j} = 0.0")
                continue
            w(f"o{j} = vo{idx}" if isvol else f"o{j} = su{idx}[0]")
            if not info[4]:
                w(f"{', '.join(dwn[j])} = to_world(ODIR{j}, frame)")
            if not info[5]:
                w(f"{', '.join(jdn[j])} = to_world(LJDIR{j}, frame)")
            if isvol:
                coupled.append(f"o{j}[6] != 0.0")
        w("coupled = " + (" or ".join(coupled) if coupled else "False"))
        w("gz = -g", "ax = ay = az = 0.0")

        def lines_at(proj) -> None:
            """Emit every line's flow at apparent acceleration f; proj(x, y, z) is f . (x, y, z)."""
            w("Tx = Ty = Tz = 0.0", "Qx = Qy = Qz = 0.0")
            if has_i:
                w("Ix = Iy = Iz = 0.0")
            for j, (info, rt) in enumerate(zip(line_info, line_rt)):
                if not live[j]:
                    continue
                isvol, idx = info[0], info[1]
                _, _, _flowfn, simple, internal, inflow, _ln = rt
                dx, dy, dz = dwn[j]
                jx, jy, jz = jdn[j]
                if isvol:
                    w(f"if o{j}[6] != 0.0:",
                      f"    up = (o{j}[0] + o{j}[6] * ({proj(dx, dy, dz)}), "
                      f"o{j}[1], o{j}[2], o{j}[3], o{j}[4], o{j}[5], o{j}[6])",
                      "else:", f"    up = o{j}")
                    if simple:
                        w(f"fl = flow{j}(up, pa, TMODE{j})", "p_in = up[0]")
                    else:
                        w(f"fl, p_in, rises = _solve_line(LN{j}, up, pa, TMODE{j}, SMODES{j}, -1.0)")
                else:
                    w(f"sup = su{idx}", "mfix = sup[1]; vin = (sup[2], sup[3], sup[4])", f"up = o{j}")
                    if simple:
                        w("if mfix < 0.0:", f"    fl = flow{j}(up, pa, TMODE{j})", "    p_in = up[0]",
                          "else:", f"    fl, p_in, rises = _solve_line(LN{j}, up, pa, TMODE{j}, SMODES{j}, mfix)")
                    else:
                        w(f"fl, p_in, rises = _solve_line(LN{j}, up, pa, TMODE{j}, SMODES{j}, mfix)")
                w(f"m{j} = fl[0]; ve{j} = fl[1]; pe = fl[2]; Ae = fl[3]")
                if inflow is not None:
                    w(f"vin = inflow{j}(m{j}, up)")
                w("pth = (pe - pa) * Ae", f"T = m{j} * ve{j} + pth",
                  f"Tx -= T * {jx}; Ty -= T * {jy}; Tz -= T * {jz}",
                  "if pth != 0.0:",
                  f"    Qx -= pth * {jx}; Qy -= pth * {jy}; Qz -= pth * {jz}")
                if internal is not None:
                    w(f"vint, _moving = internal{j}(s, VMODE{idx}, m{j})",
                      f"Ix += m{j} * vint * {dx}; Iy += m{j} * vint * {dy}; Iz += m{j} * vint * {dz}")
                if isvol:  # a vessel's line has no entering stream
                    w(f"c{j} = fl[4]; ps{j} = up[0]; pi{j} = p_in")
                else:
                    w("if vin is not None:",
                      f"    Ix += m{j} * vin[0]; Iy += m{j} * vin[1]; Iz += m{j} * vin[2]",
                      f"c{j} = fl[4]; ps{j} = up[0]; pi{j} = p_in; vn{j} = vin")

        ix, iy, iz = (" + Ix", " + Iy", " + Iz") if has_i else ("", "", "")
        sum_g = f"Gx = Fx + Tx{ix}; Gy = Fy + Ty{iy}; Gz = Fz + Tz{iz}"
        names = [f"{p}{j}" for j, info in enumerate(line_info) if live[j]
                 for p in (("m", "ve", "c", "ps", "pi") if info[0] else ("m", "ve", "c", "ps", "pi", "vn"))] + \
            ["Tx", "Ty", "Tz", "Qx", "Qy", "Qz"] + (["Ix", "Iy", "Iz"] if has_i else [])
        lines_at(lambda x, y, z: f"gz * {z}")        # f = g = (0, 0, -g): the other products are zeros
        w(sum_g)
        if kin == Kinematics.HELD:
            w("Rx = -Gx; Ry = -Gy; Rz = -Gz")
        elif kin == Kinematics.FREE:
            w("Rx = Ry = Rz = 0.0", "if not coupled:", "    ax = Gx / M; ay = Gy / M; az = Gz / M", "else:")
            with w.block():
                w("for it in range(MAXN):")
                with w.block():
                    w("rx = M * ax - Gx; ry = M * ay - Gy; rz = M * az - Gz",
                      "if it and abs(rx) + abs(ry) + abs(rz) <= 1e-12 * (abs(Gx) + abs(Gy) + abs(Gz) + M * g):",
                      "    break",
                      )
                    vlines = [j for j, info in enumerate(line_info) if info[0] and live[j]]
                    if len(vlines) == 1:
                        # one coupled line: the Sherman-Morrison step of solve_rank_one, written out
                        j = vlines[0]
                        dx, dy, dz = dwn[j]
                        jx, jy, jz = jdn[j]
                        w(f"u0 = -c{j} * {jx}; u1 = -c{j} * {jy}; u2 = -c{j} * {jz}",
                          f"hd = o{j}[6]; v0 = hd * {dx}; v1 = hd * {dy}; v2 = hd * {dz}",
                          "den = M + v0 * u0 + v1 * u1 + v2 * u2",
                          "if abs(den) < 1e-12 * abs(M):",
                          "    raise IntegrationError(_SINGULAR)",
                          "cc = (v0 * rx + v1 * ry + v2 * rz) / (M * den)",
                          "ax -= rx / M - cc * u0; ay -= ry / M - cc * u1; az -= rz / M - cc * u2")
                    else:
                        w("pairs = []")
                        for j in vlines:
                            dx, dy, dz = dwn[j]
                            jx, jy, jz = jdn[j]
                            w(f"if o{j}[6] != 0.0:",
                              f"    hd = o{j}[6]",
                              f"    pairs.append(((-c{j} * {jx}, -c{j} * {jy}, -c{j} * {jz}), "
                              f"(hd * {dx}, hd * {dy}, hd * {dz})))")
                        w("try:",
                          "    dx, dy_, dz = solve_rank_one(M, pairs, (rx, ry, rz))",
                          "except ZeroDivisionError:",
                          "    raise IntegrationError(_SINGULAR) from None",
                          "ax -= dx; ay -= dy_; az -= dz")
                    lines_at(lambda x, y, z: f"(0.0 - ax) * {x} + (0.0 - ay) * {y} + (gz - az) * {z}")
                    w(sum_g)
        else:
            at_foot = kin == Kinematics.GUIDE
            w("v_along = vx * U0 + vy * U1 + vz * U2")
            if at_foot:
                w("at_foot = v_along <= 0.0 and (s[0] - X00) * U0 + (s[1] - X01) * U1 + (s[2] - X02) * U2 <= 0.0",
                  "if at_foot:", "    first = (" + ", ".join(names) + ",)")
            else:
                w("at_foot = False")
            w("alpha = 0.0")
            w("for it in range(MAXN if coupled else 1):")
            with w.block():
                w("Gu = Gx * U0 + Gy * U1 + Gz * U2")
                if has_c:
                    w("nx_ = Gx - Gu * U0; ny_ = Gy - Gu * U1; nz_ = Gz - Gu * U2",
                      "fmax = MU * sqrt(nx_ * nx_ + ny_ * ny_ + nz_ * nz_)",
                      *(("fr = -fmax",) if bal.slide > 0.0 else ("fr = fmax",) if bal.slide < 0.0 else (
                          "if v_along > 0.0:", "    fr = -fmax",
                          "elif v_along < 0.0:", "    fr = fmax",
                          "else:", "    fr = -fmax if Gu > fmax else (fmax if Gu < -fmax else -Gu)")),
                      "r = M * alpha - Gu - fr")
                else:
                    w("r = M * alpha - Gu")
                w("if it and abs(r) <= 1e-12 * (abs(Gu) + M * g + 1e-30):", "    break", "J = M")
                for j, info in enumerate(line_info):
                    if info[0] and live[j]:
                        dx, dy, dz = dwn[j]
                        jx, jy, jz = jdn[j]
                        w(f"if o{j}[6] != 0.0:",
                          f"    J -= c{j} * ({jx} * U0 + {jy} * U1 + {jz} * U2) * o{j}[6] * ("
                          f"{dx} * U0 + {dy} * U1 + {dz} * U2)")
                w("if J <= 0.0:", "    raise IntegrationError(_SINGULAR)", "alpha -= r / J")
                if at_foot:
                    w("if alpha < 0.0 and at_foot:")
                    with w.block():
                        w("alpha = 0.0", "(" + ", ".join(names) + ",) = first", sum_g, "break")
                w("if not coupled:", "    break")
                lines_at(lambda x, y, z: f"(0.0 - alpha * U0) * {x} + (0.0 - alpha * U1) * {y} + "
                                         f"(gz - alpha * U2) * {z}")
                w(sum_g)
            if has_c:
                w("if alpha == 0.0 and at_foot:", "    fr = 0.0",
                  "Cx = fr * U0; Cy = fr * U1; Cz = fr * U2",
                  "ax = alpha * U0; ay = alpha * U1; az = alpha * U2",
                  "Rx = M * ax - Gx - Cx; Ry = M * ay - Gy - Cy; Rz = M * az - Gz - Cz")
            else:
                w("ax = alpha * U0; ay = alpha * U1; az = alpha * U2",
                  "Rx = M * ax - Gx; Ry = M * ay - Gy; Rz = M * az - Gz")
        if kind == "drives":
            w("rec = {'_light': True}")
            for j, ln in enumerate(bal._lines):
                w(f"rec.setdefault({ln.start!r}, ps{j} - pa)", f"rec[{ln.terminal!r}] = pi{j} - pa")
            w("return rec")
            return
        # derivatives: kinematics, owners' states in layout order, then the audit accumulators
        if kin == Kinematics.HELD:
            w("vx = vy = vz = 0.0")
            parts = ["0.0", "0.0", "0.0", "0.0", "0.0", "0.0"]
        else:
            parts = ["vx", "vy", "vz", "ax", "ay", "az"]
        if bal._owners:
            for k in range(len(vols)):
                ms = [f"m{j}" for j, info in enumerate(line_info) if info[0] and info[1] == k]
                w(f"vout{k} = " + " + ".join(["0.0"] + ms))
            for n, (role, k) in enumerate(bal._owners):
                if role == "volume":
                    w(f"d{n} = vderivs{k}(s, VMODE{k}, vout{k})")
                elif role == "jet":
                    w(f"d{n} = jderivs{k}(t, s, JMODE{k}, jm{k})")
                else:
                    w(f"d{n} = bderivs{k}(t, s, BMODE{k}, air)")
                parts.append(f"*d{n}")
        if not acc:
            w("return [" + ", ".join(parts) + "]")
            return
        has_n = not all(info[0] or not live[j] for j, info in enumerate(line_info))
        if has_n:
            w("Nx = Ny = Nz = 0.0")
        for j, info in enumerate(line_info):
            if not live[j]:
                continue
            jx, jy, jz = jdn[j]
            w(f"Ex += m{j} * (vx + ve{j} * {jx}); Ey += m{j} * (vy + ve{j} * {jy}); "
              f"Ez += m{j} * (vz + ve{j} * {jz})")
            if info[0]:
                w(f"mout += m{j}")
            else:
                w(f"vin = vn{j}",
                  f"Ex -= m{j} * (vx + vin[0]); Ey -= m{j} * (vy + vin[1]); Ez -= m{j} * (vz + vin[2])",
                  f"Nx += m{j} * vin[0]; Ny += m{j} * vin[1]; Nz += m{j} * vin[2]")
        px, py, pz = (" + Px", " + Py", " + Pz") if has_p else ("", "", "")
        cx, cy, cz = (" + Cx", " + Cy", " + Cz") if has_c else ("", "", "")
        parts += ["mout", "Ex", "Ey", "Ez", f"Dx{px} + Qx + Rx{cx}", f"Dy{py} + Qy + Ry{cy}",
                  f"Dz + Wz{pz} + Qz + Rz{cz}"]
        if has_n:
            parts += ["Nx - Ix", "Ny - Iy", "Nz - Iz"] if has_i else ["Nx", "Ny", "Nz"]
        else:
            parts += ["-Ix", "-Iy", "-Iz"] if has_i else ["0.0", "0.0", "0.0"]
        w("return [" + ", ".join(parts) + "]")

    for kind in ("rhs", "core", "drives"):
        w(f"def {kind}(t, y):")
        with w.block():
            body(kind)
        w("")
    return w.text()


def phase_functions(bal) -> tuple[Callable, Callable, Callable]:
    """Compiled ``(rhs, core, drives)`` for the phase ``bal`` is set to.

    The source is generated and compiled once per structure (:func:`_structure`) in the process; each
    vehicle then only binds its own values and callables.
    """
    key = _structure(bal)
    code = _CODE_CACHE.get(key)
    if code is None:
        code = compile(phase_source(bal), "<thrustgraph generated balance>", "exec")
        _CODE_CACHE[key] = code
        if len(_CODE_CACHE) > _CODE_CACHE_SIZE:
            _CODE_CACHE.popitem(last=False)
    else:
        _CODE_CACHE.move_to_end(key)
    ns = _namespace(bal)
    exec(code, ns)
    return ns["rhs"], ns["core"], ns["drives"]
