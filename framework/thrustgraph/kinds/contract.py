"""The plugin contract, checked: what a kind declares when it is registered, what it builds when a vehicle is assembled.

:mod:`thrustgraph.kinds.component` documents what a component kind declares and the
callables it builds; this module checks that a plugin keeps to it, so that a
mistake ends in one :class:`~thrustgraph.base.errors.ContractError` naming the
plugin (entry point, distribution, module), the kind, the hook and the fix,
never in a traceback from inside the generated right-hand side.

* :func:`check_declaration` runs when :mod:`thrustgraph.models.plugins` registers a
  kind (once per class and process): parameter specs whose defaults the
  kind's own parser accepts (a quantity's default carries its unit), names and
  keys declared once, units that parse, and the builder and class methods of
  the role callable with their documented arguments.
* :func:`check_system` runs at the end of :func:`thrustgraph.flight.assembly.assemble`:
  every callable of every bundle (:data:`HOOKS`) must accept the positional
  arguments the balance passes, and, called once at the initial state with the
  launch ambient, must return the documented shape: the tuple length, finite
  numbers, a dict of numbers for signals, each with a unit (a standard key or
  one the kind declares in ``signal_units``); it must not change the state list
  it is given. A callable whose code has passed once is not tried again: a study
  that assembles 10,000 designs of one vehicle checks its callables once (per
  process), the first time; a later design whose own numbers go wrong at its
  start is the integrator's to report, as a screened design. Only the scalar
  build is tried (the vectorised ensemble builds its arrays elsewhere).

Examples
--------
>>> print(HOOKS["FlowFns.flow"].call, "->", HOOKS["FlowFns.flow"].returns)
flow(up, p_down, mode) -> (mdot, v_e, p_e, A_e, dthrust_dp)
>>> def flow(up, p_down):          # the mode argument forgotten
...     return (0.0, 0.0, p_down, 0.0, 0.0)
>>> print(signature_problem(flow, HOOKS["FlowFns.flow"]))
takes 2 positional arguments (up, p_down), but the balance calls flow(up, p_down, mode)
"""

from __future__ import annotations

import ast
import inspect
import math
import numbers
import textwrap
import traceback
import warnings
import weakref
from dataclasses import dataclass
from typing import Any, Callable, Iterator

import pluggy

from .component import ComponentKind, EnvironmentKind
from ..base.errors import ContractError, ModelError, ThrustgraphError
from .parameters import Quantity, Spec
from .signalunits import STANDARD_KEY_UNITS
from ..base.units import Q_

__all__ = ["Hook", "HOOKS", "BUILDERS", "check_declaration", "check_system", "signature_problem",
           "describe_plugin", "plugin_of"]


@dataclass(frozen=True)
class Hook:
    """One callable of the contract: the bundle it belongs to, how the balance calls it, what it returns.

    ``shape`` is ``"float"`` (one finite number), ``"tuple"`` (``size`` finite
    numbers), ``"states"`` (one finite number per declared state), ``"dict"``
    (signal name -> number) or ``"supply"`` (an Outlet tuple then four finite
    numbers).
    """

    owner: str
    field: str
    args: tuple[str, ...]
    returns: str
    shape: str
    size: int = 0

    @property
    def name(self) -> str:
        """``Bundle.field``, e.g. ``FlowFns.flow``."""
        return f"{self.owner}.{self.field}"

    @property
    def call(self) -> str:
        """The call as the balance makes it, e.g. ``flow(up, p_down, mode)``."""
        return f"{self.field}({', '.join(self.args)})"


_SIGNALS = "a dict of named SI values (signal name -> number)"
_DERIVS = "one derivative per declared state"
#: Every callable a kind or an environment model builds, as the balance calls it (component.py's docstrings).
HOOKS: dict[str, Hook] = {h.name: h for h in (
    Hook("BodyFns", "force", ("air",), "(Fx, Fy, Fz) in N", "tuple", 3),
    Hook("BodyFns", "force_state", ("t", "s", "mode", "air"), "(Fx, Fy, Fz) in N", "tuple", 3),
    Hook("BodyFns", "derivs", ("t", "s", "mode", "air"), _DERIVS, "states"),
    Hook("BodyFns", "signals", ("t", "s", "mode"), _SIGNALS, "dict"),
    Hook("VolumeFns", "mass", ("s",), "the mass of the contents in kg", "float"),
    Hook("VolumeFns", "outlet", ("s", "mode"), "(p, T, rho, gamma, R, phase, head)", "tuple", 7),
    Hook("VolumeFns", "derivs", ("s", "mode", "mdot_out"), _DERIVS, "states"),
    Hook("VolumeFns", "internal", ("s", "mode", "mdot_out"), "(speed toward the outlet in m/s, moving mass in kg)",
         "tuple", 2),
    Hook("VolumeFns", "signals", ("s", "mode"), _SIGNALS, "dict"),
    Hook("FlowFns", "flow", ("up", "p_down", "mode"), "(mdot, v_e, p_e, A_e, dthrust_dp)", "tuple", 5),
    Hook("FlowFns", "rise", ("up", "mdot", "mode"), "the pressure rise across the element in Pa", "float"),
    Hook("FlowFns", "signals", ("up", "p_down", "mode"), _SIGNALS, "dict"),
    Hook("SourceFns", "supply", ("t", "s", "mode", "air"), "(up, mdot_fixed, vin_x, vin_y, vin_z), up an Outlet "
         "tuple (p, T, rho, gamma, R, phase, head)", "supply", 5),
    Hook("SourceFns", "signals", ("t", "s", "mode"), _SIGNALS, "dict"),
    Hook("SourceFns", "rise", ("up", "mdot", "mode"), "the pressure change to the vehicle in Pa", "float"),
    Hook("SourceFns", "inflow", ("mdot", "up"), "(vin_x, vin_y, vin_z) in m/s", "tuple", 3),
    Hook("JetFns", "mass", ("s",), "the mass the jet holds in kg", "float"),
    Hook("JetFns", "jet", ("t", "s", "mode", "p_a"), "(mdot, v_e, p_e, A_e)", "tuple", 4),
    Hook("JetFns", "derivs", ("t", "s", "mode", "mdot"), _DERIVS, "states"),
    Hook("JetFns", "signals", ("t", "s", "mode"), _SIGNALS, "dict"),
    Hook("EventSpec", "fn", ("t", "s", "drive"), "one finite number whose zero crossing is the event", "float"),
    Hook("medium", "fn", ("z", "t"), "(rho, p, T, wind_x, wind_y, wind_z)", "tuple", 6),
    Hook("gravity", "fn", ("z",), "g in m/s^2", "float"),
)}

#: The builder of each role and the arguments assembly passes (a body with states also gets ``i, amb``).
BUILDERS: dict[str, tuple[str, tuple[str, ...]]] = {
    "body": ("build_body", ("p", "ops")),
    "volume": ("build_volume", ("p", "i", "ops", "amb")),
    "flow": ("build_flow", ("p", "ops")),
    "jet": ("build_jet", ("p", "i", "ops", "amb")),
    "source": ("build_source", ("p", "i", "ops", "amb")),
}
_CLASS_HOOKS = (("check", ("p", "where")), ("cautions", ("p",)), ("initial_state", ("p", "amb")),
                ("initial_mode", ("p", "amb")), ("describe_mass", ("p", "amb")),
                ("summarize", ("name", "p", "result")), ("flight_cautions", ("name", "p", "result")))
_BUNDLE_FIELDS = {
    "body": ("BodyFns", ("force", "force_state", "derivs", "signals")),
    "volume": ("VolumeFns", ("mass", "outlet", "derivs", "internal", "signals")),
    "flow": ("FlowFns", ("flow", "rise", "signals")),
    "source": ("SourceFns", ("supply", "signals", "rise", "inflow")),
    "jet": ("JetFns", ("mass", "jet", "derivs", "signals")),
}
_DOC = "see the contract in thrustgraph/kinds/component.py and docs/plugins.md"

_DECLARED: "weakref.WeakSet[type]" = weakref.WeakSet()   # kinds whose declaration passed (once per class)
# (kind, hook, id of the code, number of defaults) -> the code object, for the callables that passed at an initial
# state; the value keeps the code alive, so that its id is not reused while the key stands
_PASSED: dict[tuple, Any] = {}
_PASSED_LIMIT = 4096


# ---------------------------------------------------------------------------
# Naming the plugin
# ---------------------------------------------------------------------------

def describe_plugin(pm: pluggy.PluginManager, plugin: object, cls: type | None = None) -> str:
    """``plugin 'NAME' (distribution DIST VERSION, module MOD)``: who to tell about a broken contract."""
    name = pm.get_name(plugin) or ""
    if not name or name.isdigit():      # an object registered without a name: pluggy names it by id
        name = getattr(plugin, "__name__", None) or type(plugin).__name__
    parts = [f"distribution {d.project_name} {d.version}" for p, d in pm.list_plugin_distinfo() if p is plugin]
    module = cls.__module__ if cls is not None else getattr(plugin, "__name__", type(plugin).__module__)
    parts.append(f"module {module}")
    return f"plugin {name!r} ({', '.join(parts)})"


def plugin_of(pm: pluggy.PluginManager, cls: type) -> str:
    """Describe the plugin that declared kind ``cls`` (only called to word an error)."""
    for hook in (pm.hook.thrustgraph_component_kinds, pm.hook.thrustgraph_environment_kinds):
        for impl in hook.get_hookimpls():
            if impl.argnames:
                continue
            try:
                found = cls in list(impl.function() or ())
            except Exception:  # a plugin that fails here is named by its own error elsewhere
                found = False
            if found:
                return describe_plugin(pm, impl.plugin, cls)
    return f"plugin module {cls.__module__!r}"


def _where_fn(fn: Any) -> str:
    """``name() at package/module.py:LINE`` for a function, else its repr."""
    f = getattr(fn, "__func__", fn)
    code = getattr(f, "__code__", None)
    if code is None:
        return repr(fn)
    parts = code.co_filename.replace("\\", "/").split("/")
    return f"{getattr(f, '__qualname__', code.co_name)}() at {'/'.join(parts[-2:])}:{code.co_firstlineno}"


# ---------------------------------------------------------------------------
# Signatures
# ---------------------------------------------------------------------------

def _positional(sig: inspect.Signature) -> tuple[list[str], bool]:
    names, star = [], False
    for p in sig.parameters.values():
        if p.kind in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD):
            names.append(p.name)
        elif p.kind == p.VAR_POSITIONAL:
            star = True
    return names, star


def signature_problem(fn: Any, hook: Hook | tuple[str, tuple[str, ...]]) -> str | None:
    """Why ``fn`` cannot be called with the hook's positional arguments, or None when it can.

    ``hook`` is a :class:`Hook` or ``(name, args)``. Callables whose signature
    Python cannot tell (some built-ins) pass.

    >>> signature_problem(lambda up, p_down, mode=0: None, HOOKS["FlowFns.flow"]) is None
    True
    >>> print(signature_problem(lambda s, mode, mdot, extra: None, HOOKS["VolumeFns.derivs"]))
    needs 4 positional arguments (s, mode, mdot, extra), but the balance calls derivs(s, mode, mdot_out)
    """
    field, args = (hook.field, hook.args) if isinstance(hook, Hook) else hook
    if not callable(fn):
        return f"is {type(fn).__name__} {fn!r}, not a function"
    try:
        sig = inspect.signature(fn)
    except (TypeError, ValueError):
        return None
    try:
        sig.bind(*args)
        return None
    except TypeError:
        pass
    names, star = _positional(sig)
    required = [p.name for p in sig.parameters.values()
                if p.kind in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD) and p.default is p.empty]
    call = f"{field}({', '.join(args)})"
    kw = [p.name for p in sig.parameters.values() if p.kind == p.KEYWORD_ONLY and p.default is p.empty]
    if kw:
        return f"has keyword-only argument(s) without a default ({', '.join(kw)}), but the balance calls {call}"
    if len(required) > len(args):
        return (f"needs {len(required)} positional arguments ({', '.join(required)}), but the balance calls "
                f"{call}")
    if not star and len(names) < len(args):
        n = len(names)
        return (f"takes {n} positional argument{'s' if n != 1 else ''} ({', '.join(names)}), but the balance "
                f"calls {call}")
    return f"cannot be called as {call}"


# ---------------------------------------------------------------------------
# Declarations, when a kind is registered
# ---------------------------------------------------------------------------

def check_declaration(cls: type, pm: pluggy.PluginManager, plugin: object) -> None:
    """Check what a kind declares, once per class and process; raise :class:`ContractError` naming the plugin.

    Parameters
    ----------
    cls : a ComponentKind or EnvironmentKind subclass being registered
    pm, plugin : the plugin manager and the plugin object whose hook returned ``cls`` (named in errors)
    """
    if cls in _DECLARED:
        return

    def where(item: str = "") -> str:
        role = getattr(cls, "role", "") or getattr(cls, "slot", "")
        text = f"{describe_plugin(pm, plugin, cls)}, kind {cls.kind!r}" + (f" ({role})" if role else "")
        return f"{text}, {item}" if item else text

    _check_specs(cls, where)
    _check_names(cls, where)
    _check_callables(cls, where)
    _DECLARED.add(cls)


def _check_specs(cls: type, where: Callable[[str], str]) -> None:
    specs = cls.parameters
    if not isinstance(specs, (tuple, list)):
        raise ContractError(where("parameters"), f"is {type(specs).__name__}, not a tuple of parameter specs",
                            "write parameters = (Quantity(...), Number(...), ...)")
    for s in specs:
        if not isinstance(s, Spec):
            raise ContractError(where("parameters"), f"holds {s!r}, which is not a parameter spec",
                                "declare each parameter with thrustgraph.kinds.parameters (Quantity, Number, Choice, "
                                "Flag, Vector, Table)")
        default = getattr(s, "default", None)
        if default is None:
            continue
        item = f"parameter {s.name!r}"
        if isinstance(s, Quantity) and s.unit and isinstance(default, (int, float)) and not isinstance(default, bool):
            raise ContractError(where(item), f"its default {default!r} has no unit, but the parameter is declared "
                                f"in {s.unit!r}", f'write the default with its unit, default="{default:g} {s.unit}"')
        try:
            s.parse(default, where=f"{s.name} (default)")
        except ModelError as exc:
            raise ContractError(where(item), f"its default {default!r} is not a value the parameter accepts "
                                f"({exc.what})", f"declare a default that passes the parameter's own checks "
                                f"({exc.fix.rstrip('.')})" if exc.fix else "declare a valid default") from None


def _duplicates(names: list[str]) -> list[str]:
    seen: set[str] = set()
    return [n for n in names if n in seen or seen.add(n)]  # type: ignore[func-returns-value]


def _check_names(cls: type, where: Callable[[str], str]) -> None:
    lists = [("parameter", [s.name for s in cls.parameters])]
    if issubclass(cls, ComponentKind):
        lists += [("state", [v.name for v in cls.states]), ("mode", [m.name for m in cls.modes])]
    for what, names in lists:
        twice = _duplicates(names)
        if twice:
            raise ContractError(where(f"{what} {twice[0]!r}"), f"is declared twice among the kind's {what}s",
                                f"give each {what} its own name")
    if not issubclass(cls, ComponentKind):
        return
    for attr in ("signal_units",):      # outcomes (OutcomeSpec) are checked by thrustgraph.balance.outcomes
        table = getattr(cls, attr)
        if not isinstance(table, dict):
            raise ContractError(where(attr), f"is {type(table).__name__}, not a dict of key -> SI unit",
                                f'write {attr} = {{"key": "unit", ...}}')
        for key, unit in table.items():
            try:
                Q_(1.0, unit)
            except Exception:  # pint raises several types for bad text
                raise ContractError(where(f"{attr}[{key!r}]"), f"the unit {unit!r} cannot be read",
                                    'write an SI unit such as "m", "N", "m^2" or "" for a plain number') from None
    for attr, key in _literal_duplicates(cls):
        raise ContractError(where(f"{attr}[{key!r}]"), f"the key {key!r} is declared twice in {attr} (Python keeps "
                            "only the last one)", "declare each key once")


def _literal_duplicates(cls: type) -> list[tuple[str, str]]:
    """Keys written twice in the class body's ``signal_units = {...}`` / ``summary_units = {...}`` literals."""
    attrs = [a for a in ("signal_units",) if a in cls.__dict__]
    if not attrs:
        return []
    try:
        tree = ast.parse(textwrap.dedent(inspect.getsource(cls)))
    except (OSError, TypeError, SyntaxError):  # no source to read (a class made at run time)
        return []
    out = []
    body = tree.body[0].body if tree.body and isinstance(tree.body[0], ast.ClassDef) else []
    for stmt in body:
        target = stmt.targets[0] if isinstance(stmt, ast.Assign) and len(stmt.targets) == 1 else \
            getattr(stmt, "target", None)
        value = getattr(stmt, "value", None)
        if isinstance(target, ast.Name) and target.id in attrs and isinstance(value, ast.Dict):
            keys = [k.value for k in value.keys if isinstance(k, ast.Constant) and isinstance(k.value, str)]
            out.extend((target.id, k) for k in _duplicates(keys))
    return out


def _check_callables(cls: type, where: Callable[[str], str]) -> None:
    if issubclass(cls, EnvironmentKind):
        if cls.slot not in ("medium", "gravity"):
            raise ContractError(where("slot"), f"is {cls.slot!r}", 'set slot = "medium" or slot = "gravity"')
        wanted = [("build", ("p", "ops"), True), ("check", ("p", "where"), False)]
    else:
        wanted = [(n, a, False) for n, a in _CLASS_HOOKS]
        if cls.role in BUILDERS:
            name, args = BUILDERS[cls.role]
            if cls.role == "body" and cls.states:
                args = args + ("i", "amb")
            wanted.insert(0, (name, args, True))
    base = EnvironmentKind if issubclass(cls, EnvironmentKind) else ComponentKind
    for name, args, required in wanted:
        fn = getattr(cls, name)
        if required and getattr(fn, "__func__", None) is getattr(getattr(base, name), "__func__", None):
            raise ContractError(where(name), f"is not defined: a {getattr(cls, 'role', '') or cls.slot} kind builds "
                                "its callables there", f"define @classmethod {name}(cls, {', '.join(args)}); {_DOC}")
        problem = signature_problem(fn, (name, args))
        if problem:
            raise ContractError(where(f"{name} ({_where_fn(fn)})"), problem.replace("the balance calls",
                                "assembly calls"), f"define it as @classmethod {name}(cls, {', '.join(args)}); {_DOC}")


# ---------------------------------------------------------------------------
# Callables, when a vehicle is assembled
# ---------------------------------------------------------------------------

def _callables(system: Any) -> Iterator[tuple[str, type, Hook, Any]]:
    """(component, kind, hook, callable) for every callable of the assembled vehicle's plan, environment included."""
    parsed, plan = system.parsed, system.plan
    kinds = parsed.kinds
    yield "environment.medium", parsed.env_kinds["medium"], HOOKS["medium.fn"], plan.medium
    yield "environment.gravity", parsed.env_kinds["gravity"], HOOKS["gravity.fn"], plan.gravity
    for role, members in (("body", plan.bodies), ("volume", plan.vessels), ("jet", plan.jets),
                          ("source", plan.sources)):
        owner, fields = _BUNDLE_FIELDS[role]
        for member in members:
            for f in fields:
                fn = getattr(member.fns, f)
                if fn is not None:
                    yield member.name, kinds[member.name], HOOKS[f"{owner}.{f}"], fn
    for ln in plan.lines:
        for e in ln.series:
            if kinds[e.name].role == "flow":           # a source's own loss is listed with the source
                yield e.name, kinds[e.name], HOOKS["FlowFns.rise"], e.rise
                if e.signals is not None:
                    yield e.name, kinds[e.name], HOOKS["FlowFns.signals"], e.signals
        yield ln.terminal, kinds[ln.terminal], HOOKS["FlowFns.flow"], ln.terminal_fns.flow
        if ln.terminal_fns.signals is not None:
            yield ln.terminal, kinds[ln.terminal], HOOKS["FlowFns.signals"], ln.terminal_fns.signals
    for n, e in plan.events:
        yield n, kinds[n], HOOKS["EventSpec.fn"], e.fn


def check_system(system: Any) -> Any:
    """Check every callable of an assembled vehicle against the contract; return the system unchanged.

    Raises :class:`ContractError` naming the plugin, the kind, the component,
    the hook and the callable. The ensemble's array builds
    (:mod:`thrustgraph.flight.arraysystem`) are not tried here.

    >>> from thrustgraph.flight.assembly import assemble
    >>> from thrustgraph.models.modelfile import load_model, default_model_path
    >>> system = assemble(load_model(default_model_path()))   # assemble() calls check_system
    >>> check_system(system) is system
    True
    """
    keys: list | None = []
    known = True
    for n, cls, hook, fn in _callables(system):
        f = getattr(fn, "__func__", fn)
        code = getattr(f, "__code__", None)
        if code is None:            # a callable object or a built-in: tried at every assembly
            keys = None
            break
        key = (cls, hook.name, id(code), len(f.__defaults__ or ()))
        keys.append((key, code))
        known = known and key in _PASSED
    if keys is not None and known:
        return system
    _Trial(system).run()
    if keys is not None:
        if len(_PASSED) > _PASSED_LIMIT:
            _PASSED.clear()
        _PASSED.update(keys)
    return system


def _is_number(x: Any) -> bool:
    return isinstance(x, numbers.Real)


def _finite(x: Any) -> bool:
    return _is_number(x) and math.isfinite(x)


class _Trial:
    """One evaluation of every callable at the initial state and the launch ambient, checked as it goes."""

    def __init__(self, system: Any) -> None:
        self.system = system
        self.parsed = system.parsed
        self.kinds = system.parsed.kinds
        self.mode = dict(zip(system.moded, system.mode0))

    def fail(self, comp: str, cls: type, item: str, what: str, fix: str) -> ContractError:
        role = getattr(cls, "role", "") or getattr(cls, "slot", "")
        where = f"{plugin_of(self.parsed.plugin_manager, cls)}, kind {cls.kind!r} ({role})"
        if not comp.startswith("environment."):
            where += f" as component {comp!r}"
        return ContractError(f"{where}, {item}", what, fix)

    def call(self, comp: str, hook: Hook, fn: Any, args: tuple, label: str = "") -> Any:
        cls = self.parsed.env_kinds[comp.split(".")[1]] if comp.startswith("environment.") else self.kinds[comp]
        item = f"{label}{hook.name} = {_where_fn(fn)}"
        expect = f"define it as {hook.call} returning {hook.returns}; {_DOC}"
        problem = signature_problem(fn, hook)
        if problem:
            raise self.fail(comp, cls, item, problem, expect)
        state = args[hook.args.index("s")] if "s" in hook.args else None
        before = list(state) if state is not None else None
        with warnings.catch_warnings(record=True) as warned:   # numpy's warnings join the message, if any
            warnings.simplefilter("always")
            try:
                out = fn(*args)
            except ThrustgraphError:
                raise
            except Exception as exc:
                frames = traceback.extract_tb(exc.__traceback__)
                at = f" (at {'/'.join(frames[-1].filename.split('/')[-2:])}:{frames[-1].lineno})" if frames else ""
                raise self.fail(comp, cls, item, f"raised {type(exc).__name__}: {exc}{at} when called as "
                                f"{hook.call} at the initial state", f"{expect}; refuse in check() the parameter "
                                "values it cannot handle") from None
        if before is not None and state != before:
            raise self.fail(comp, cls, item, "changed the state list s it was given", "never modify s: adaptive "
                            "solvers evaluate and reject trial steps; return new values instead")
        bad = self._shape(cls, hook, out)
        if bad:
            said = "; ".join(dict.fromkeys(f"{w.category.__name__}: {w.message}" for w in warned))
            raise self.fail(comp, cls, item, f"{bad} when called as {hook.call} at the initial state, where "
                            f"{hook.returns} was expected" + (f" (it warned {said})" if said else ""), expect)
        for w in warned:                  # a callable that keeps the contract keeps its warnings too
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        if hook.shape == "dict" and not comp.startswith("environment."):
            self._units(comp, cls, item, out)
        return out

    def _units(self, comp: str, cls: type, item: str, out: dict) -> None:
        """Every signal a component reports has a unit: a standard key or one its kind declares."""
        declared = getattr(cls, "signal_units", {})
        for key in out:
            if key not in declared and STANDARD_KEY_UNITS.get(key) is None:
                raise self.fail(comp, cls, item, f"reports the signal {key!r} but its kind declares no unit for it",
                                f"add {key!r}: \"UNIT\" to the kind's signal_units (\"\" for a pure number), "
                                "or use a standard key (thrustgraph.flight.result.STANDARD_KEY_UNITS)")

    def _shape(self, cls: type, hook: Hook, out: Any) -> str | None:
        if hook.shape == "float":
            if not _is_number(out):
                return f"returned {type(out).__name__} {out!r}, not a number"
            return None if math.isfinite(out) else f"returned {out!r}, which is not finite"
        if hook.shape == "dict":
            if not isinstance(out, dict):
                return f"returned {type(out).__name__} {out!r}, not a dict"
            for k, v in out.items():
                if not isinstance(k, str) or not _is_number(v):
                    return f"returned the entry {k!r}: {v!r}; keys must be names (str) and values numbers"
            return None
        size = len(cls.states) if hook.shape == "states" else hook.size
        if not isinstance(out, (tuple, list)):
            return f"returned {type(out).__name__} {out!r}, not a tuple of {size}"
        if len(out) != size:
            return f"returned {len(out)} value{'s' if len(out) != 1 else ''}, not {size}"
        items = list(out)
        if hook.shape == "supply":
            up = out[0]
            if not isinstance(up, (tuple, list)) or len(up) != 7:
                return f"returned {up!r} as up, not an Outlet tuple of 7 (p, T, rho, gamma, R, phase, head)"
            items = list(up) + items[1:]
        for k, v in enumerate(items):
            if not _finite(v):
                return f"returned {out!r}: entry {k} is {v!r}, not a finite number"
        return None

    def value(self, comp: str, item: str, value: Any, size: int = 0) -> None:
        """A plain field of a bundle (a mass, a direction): finite number(s)."""
        cls = self.kinds[comp]
        if size:
            ok = isinstance(value, (tuple, list)) and len(value) == size and all(_finite(c) for c in value) \
                and any(c != 0.0 for c in value)
            if not ok:
                raise self.fail(comp, cls, item, f"is {value!r}, not a direction of {size} finite numbers",
                                "give a body-frame direction such as (-1.0, 0.0, 0.0)")
        elif not (_finite(value) and value >= 0.0):
            raise self.fail(comp, cls, item, f"is {value!r}, not a finite mass >= 0 in kg", "give the mass in kg")

    def run(self) -> None:
        sysm = self.system
        plan = sysm.plan
        s = list(sysm.y0)
        t = 0.0
        mode = self.mode
        med = self.call("environment.medium", HOOKS["medium.fn"], plan.medium, (s[2], t))
        g = self.call("environment.gravity", HOOKS["gravity.fn"], plan.gravity, (s[2],))
        for slot, fn, out in (("medium", plan.medium, med), ("gravity", plan.gravity, g)):
            uni = getattr(fn, "uniform", None)
            if uni is not None and uni != out:
                raise self.fail(f"environment.{slot}", self.parsed.env_kinds[slot], f"{slot} fn.uniform",
                                f"is {uni!r}, but the function returns {out!r}",
                                "set fn.uniform to exactly what fn returns, or leave it unset")
        rho, pa, Ta, wx, wy, wz = med
        vr = (s[3] - wx, s[4] - wy, s[5] - wz)
        air = (rho, pa, Ta) + vr + (math.sqrt(vr[0] ** 2 + vr[1] ** 2 + vr[2] ** 2),)
        H = HOOKS
        for body in plan.bodies:
            n, b, m = body.name, body.fns, mode.get(body.name, 0)
            self.value(n, "BodyFns.mass", b.mass)
            if b.force_state is not None:
                self.call(n, H["BodyFns.force_state"], b.force_state, (t, s, m, air))
            elif b.force is not None:
                self.call(n, H["BodyFns.force"], b.force, (air,))
            if b.derivs is not None:
                self.call(n, H["BodyFns.derivs"], b.derivs, (t, s, m, air))
            if b.signals is not None:
                self.call(n, H["BodyFns.signals"], b.signals, (t, s, m))
        for jet in plan.jets:
            n, j, m = jet.name, jet.fns, mode.get(jet.name, 0)
            self.value(n, "JetFns.jet_dir", j.jet_dir, 3)
            self.call(n, H["JetFns.mass"], j.mass, (s,))
            out = self.call(n, H["JetFns.jet"], j.jet, (t, s, m, pa))
            self.call(n, H["JetFns.derivs"], j.derivs, (t, s, m, out[0]))
            self.call(n, H["JetFns.signals"], j.signals, (t, s, m))
        outlets = {}
        for vessel in plan.vessels:
            n, v = vessel.name, vessel.fns
            self.value(n, "VolumeFns.outlet_dir", v.outlet_dir, 3)
            self.call(n, H["VolumeFns.mass"], v.mass, (s,))
            outlets[n] = tuple(self.call(n, H["VolumeFns.outlet"], v.outlet, (s, mode.get(n, 0))))
        supplies = {src.name: self.call(src.name, H["SourceFns.supply"], src.fns.supply,
                                        (t, s, mode.get(src.name, 0), air)) for src in plan.sources}
        drive: dict[str, float] = {}
        out_flow: dict[str, float] = {}
        for ln in plan.lines:
            up = outlets[ln.start] if ln.from_vessel else tuple(supplies[ln.start][0])
            drive.setdefault(ln.start, up[0] - pa)
            cur = up
            for e in ln.series:
                own = not ln.from_vessel and e.name == ln.start       # a source's own loss (a hose)
                m = mode.get(e.name, 0)
                r = self.call(e.name, H["SourceFns.rise" if own else "FlowFns.rise"], e.rise, (cur, 0.0, m))
                if e.signals is not None:
                    self.call(e.name, H["FlowFns.signals"], e.signals, (cur, pa, m))
                cur = (cur[0] + r,) + tuple(cur[1:])
            term, fns = ln.terminal, ln.terminal_fns
            self.value(term, "FlowFns.jet_dir", fns.jet_dir, 3)
            fl = self.call(term, H["FlowFns.flow"], fns.flow, (cur, pa, mode.get(term, 0)))
            if fns.signals is not None:
                self.call(term, H["FlowFns.signals"], fns.signals, (cur, pa, mode.get(term, 0)))
            drive[term] = cur[0] - pa
            if ln.inflow is not None:
                self.call(ln.start, H["SourceFns.inflow"], ln.inflow, (fl[0], up))
            out_flow[ln.start] = out_flow.get(ln.start, 0.0) + fl[0]
        for vessel in plan.vessels:
            n, v, m = vessel.name, vessel.fns, mode.get(vessel.name, 0)
            self.call(n, H["VolumeFns.derivs"], v.derivs, (s, m, out_flow.get(n, 0.0)))
            if v.internal is not None:
                self.call(n, H["VolumeFns.internal"], v.internal, (s, m, out_flow.get(n, 0.0)))
            self.call(n, H["VolumeFns.signals"], v.signals, (s, m))
        for src in plan.sources:
            if src.fns.signals is not None:
                self.call(src.name, H["SourceFns.signals"], src.fns.signals, (t, s, mode.get(src.name, 0)))
        for n, e in plan.events:
            self.call(n, H["EventSpec.fn"], e.fn, (t, list(s), drive.get(n, 0.0) if e.needs_drive else 0.0),
                      label=f"event {e.name!r}, ")
