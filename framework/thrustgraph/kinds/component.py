"""Component kinds: what a device family declares and what it hands to the integrator.

A *component kind* is a class registered by a plugin (see :mod:`thrustgraph.kinds.hookspecs`).
It declares typed parameters, its state variables and its discrete modes, and at
assembly it *builds* plain Python callables that the balance calls on every
right-hand-side evaluation. The kind is never consulted during integration.

Roles
-----
``body``
    Carries fixed mass and may add an external force (drag, friction). Example:
    an airframe.
``volume``
    Holds state (liquid mass, gas mass) and reports its outlet condition.
    Example: a pressurised liquid tank.
``flow``
    Sits on a path between a volume and the surroundings (or another volume)
    and sets the mass flow from the states on either side. Example: a nozzle.
``source``
    Fluid entering the vehicle from outside: an inlet capturing the medium
    (ram drag), a hose from a fixed station. Paths run source -> flow
    elements -> surroundings.
``jet``
    A self-contained propulsive source with a prescribed mass flow and
    exhaust velocity (or thrust) history; it holds its own propellant.
``boundary``
    The surroundings. Every path that reaches it crosses the control surface
    and contributes a momentum flux to the vehicle balance.

The implementer's contract
--------------------------
1. Set ``kind`` (lower case words joined by hyphens, unique across plugins),
   ``role``, ``summary`` and ``parameters`` (a tuple of
   :mod:`thrustgraph.kinds.parameters` specs). Values reach you as SI floats in a
   frozen dataclass ``p``.
2. Any component may declare ``states`` (tuple of :class:`StateVar`) and
   ``modes`` (tuple of :class:`Mode`); the first mode is the default. Bodies
   with states (e.g. a recovery device's opening fraction) set the state-aware
   fields of :class:`BodyFns`; flow elements with modes (a relief valve) get
   their mode in ``flow`` and ``rise``.
3. Override :meth:`ComponentKind.check` to refuse parameter combinations that
   make no physical sense; raise :class:`~thrustgraph.base.errors.ModelError` naming
   the parameter and the fix.
4. Override the ``build_*`` method of your role. It runs once per assembly and
   returns a bundle of callables (:class:`BodyFns`, :class:`VolumeFns`,
   :class:`FlowFns`, :class:`JetFns`). ``i`` is the offset of your first state in
   the flat state list ``s`` those callables receive; ``amb`` the ambient
   conditions at the launch point.
5. The callables take and return floats and tuples (:class:`Outlet` and
   :class:`Flow` records where the bundles say so). They must not mutate
   anything: adaptive solvers evaluate trial stages and reject steps.
6. Write each callable once against ``ops`` (:mod:`thrustgraph.base.xp`): no ``if``
   on a value that may differ between designs (``ops.where``, ``ops.branch``,
   clipped square roots), so the same code runs for one design on floats and
   for an ensemble on numpy arrays. Set ``vectorised = True`` when it does.
7. Units inside are SI: Pa, K, kg, m, s, kg/m^3, N.
8. Return safety cautions for the model from :meth:`ComponentKind.cautions`.
9. Numbers that sum up a run for this component (a parachute's deployment
   speed) are outcomes: declare each once in ``outcomes`` (a tuple of
   :class:`~thrustgraph.kinds.outcomespec.OutcomeSpec`) and return their values
   from :meth:`ComponentKind.summarize`. Cautions that depend on what
   happened in the run (a tank that got cold) come from
   :meth:`ComponentKind.flight_cautions`; a signal whose changes of value
   belong in the event log (a nozzle's flow regime) is declared in
   ``logged`` (a tuple of :class:`LoggedSignal`).
10. A volume whose contents reach its outlet through a known cross-section
    (a liquid column in a bore) may say so with :meth:`ComponentKind.approach_area`;
    a flow element that uses it (the velocity of approach of a liquid jet) sets
    ``takes_approach_area = True`` and then receives it at assembly as
    ``build_flow(p, ops, approach_area=A)`` (m^2, float or an array over designs;
    None when the element is not the single outlet of a volume that knows it).
11. Write every :class:`~thrustgraph.kinds.parameters.Quantity` default with its
    unit (``default="20 mm"``) and declare each parameter, state, mode and
    signal key once. :mod:`thrustgraph.kinds.contract` checks this when the kind is
    registered, and checks at assembly that every callable accepts the
    positional arguments listed in the bundles' docstrings below and returns
    the documented tuple length, finite numbers at the initial state, and a
    dict for signals; a mismatch is a :class:`~thrustgraph.base.errors.ContractError`
    naming the plugin and the hook.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, ClassVar, NamedTuple

from .outcomespec import OutcomeSpec
from .parameters import Spec, make_params_class
from ..base.xp import ScalarOps, scalar_ops

__all__ = [
    "ROLES", "StateVar", "Mode", "EventSpec", "Outlet", "Flow", "BodyFns", "VolumeFns", "FlowFns", "JetFns", "SourceFns",
    "ComponentKind", "EnvironmentKind", "ScalarOps", "scalar_ops", "Ambient", "LoggedSignal",
]

ROLES = ("body", "volume", "flow", "jet", "source", "boundary")


@dataclass(frozen=True)
class StateVar:
    """A state variable a component integrates: name, SI unit, meaning."""

    name: str
    unit: str
    doc: str = ""


@dataclass(frozen=True)
class Mode:
    """A discrete operating mode of a component.

    ``label`` names the flight phase while the mode is active (e.g. "liquid
    thrust"); ``propulsive`` says whether the component can push in it.
    ``outflow=False`` promises that nothing flows through the component in
    this mode (a sealed vessel, a closed valve): its flows would be exact
    zeros, so the generated right-hand side skips the discharge lines it is on
    (a test checks the promise on the bundled models).
    """

    name: str
    label: str
    propulsive: bool = True
    outflow: bool = True


@dataclass(frozen=True)
class EventSpec:
    """A continuous event function of a component, in the sense of solve_ivp.

    ``fn(t, s, drive)`` returns a float whose zero crossing in ``direction``
    (-1 falling, +1 rising, 0 either) triggers the event while the component is
    in one of the modes ``when``. ``drive`` is the pressure difference that
    pushes fluid out of the component's outlet (Pa), supplied by the balance.
    On the event the component switches to mode ``to`` (a mode name), or the
    flight stops when ``to`` is None. Set ``needs_drive=False`` when ``fn``
    does not use ``drive`` (it is then passed as 0.0 and costs nothing).
    """

    name: str
    fn: Callable[[float, list, float], float]
    direction: float
    when: tuple[str, ...]
    to: str | None
    needs_drive: bool = True


@dataclass(frozen=True)
class LoggedSignal:
    """A signal of a component whose changes of value are entries of the run's event log.

    ``key`` is the signal (as the component's signals return it), ``event`` the name of the log entry,
    ``values`` what each value means in words (a value not listed is shown as a number), ``at_start`` the
    values that are logged when the run starts in them (a flag already raised at launch).

    >>> sep = LoggedSignal("separation", "flow separation", {0.0: "attached", 1.0: "criterion met"}, (1.0,))
    >>> sep.words(1.0), sep.words(7.0)
    ('criterion met', '7')
    """

    key: str
    event: str
    values: dict = None  # type: ignore[assignment]
    at_start: tuple = ()

    def words(self, value: float) -> str:
        """A value in words."""
        return (self.values or {}).get(float(value), f"{value:g}")


@dataclass(frozen=True)
class Ambient:
    """Ambient conditions at the launch point, for initial states (SI)."""

    pressure: float
    temperature: float
    density: float



class Outlet(NamedTuple):
    """What leaves a volume's outlet (or enters from a source), SI; floats, or arrays over designs.

    ``p`` is the static pressure at the outlet without the liquid head (Pa); ``T`` the temperature of what
    flows out (K); ``rho`` its density (kg/m^3); ``gamma`` and ``R`` the gas's ratio of specific heats and
    specific gas constant (J/(kg K); ignored for a liquid); ``phase`` 1.0 when liquid flows out, 0.0 for gas,
    -1.0 when the outlet is shut; ``head`` is rho_liquid h (kg/m^2): the pressure at the outlet is
    ``p + head (f . d)``, f the apparent acceleration g - a and d the outlet direction.

    >>> Outlet(5e5, 288.15, 998.2, 1.4, 287.05, 1.0, 0.0).phase
    1.0
    """

    p: Any
    T: Any
    rho: Any
    gamma: Any
    R: Any
    phase: Any
    head: Any


class Flow(NamedTuple):
    """What a flow element discharging to the surroundings passes, SI; floats, or arrays over designs.

    ``mdot`` mass flow (kg/s, >= 0); ``v_e`` exit velocity relative to the vehicle (m/s); ``p_e`` exit
    pressure (Pa); ``A_e`` the area over which p_e - p_a acts (m^2); ``slope`` the derivative of the thrust
    magnitude with respect to the upstream pressure (N/Pa; it solves the liquid-head coupling).

    >>> Flow(1.0, 20.0, 101325.0, 3e-4, 6e-4).mdot
    1.0
    """

    mdot: Any
    v_e: Any
    p_e: Any
    A_e: Any
    slope: Any


@dataclass(frozen=True)
class BodyFns:
    """What a body contributes.

    ``force(air)`` receives ``(rho, p_a, T_a, vx, vy, vz, speed)`` (ambient
    density, pressure, temperature, and the vehicle's velocity through the
    medium with its magnitude) and returns a force (Fx, Fy, Fz) in N, or the
    attribute is None. A body with states or modes (a recovery device) uses
    ``force_state(t, s, mode, air)`` instead, ``derivs(t, s, mode, air)`` for its
    state derivatives, ``signals(t, s, mode)`` and ``events``.
    """

    mass: float
    force: Callable[[tuple], tuple] | None = None
    force_name: str = "drag"
    force_state: Callable[[float, list, int, tuple], tuple] | None = None
    derivs: Callable[[float, list, int, tuple], tuple] | None = None
    signals: Callable[[float, list, int], dict] | None = None
    events: tuple[EventSpec, ...] = ()


@dataclass(frozen=True)
class VolumeFns:
    """What a volume contributes.

    mass(s) -> kg; outlet(s, mode) -> Outlet; derivs(s, mode, mdot_out) -> tuple
    of state derivatives; internal(s, mode, mdot_out) -> (speed of the contents
    toward the outlet in m/s, mass moving at that speed in kg), or None when
    the internal-momentum term is off;
    signals(s, mode) -> dict of named SI values for results; events -> specs.
    ``outlet_dir`` is the body-frame direction from the contents toward the
    outlet (for the liquid head and the internal momentum).
    """

    mass: Callable[[list], float]
    outlet: Callable[[list, int], tuple]
    derivs: Callable[[list, int, float], tuple]
    signals: Callable[[list, int], dict]
    outlet_dir: tuple[float, float, float] = (-1.0, 0.0, 0.0)
    internal: Callable[[list, int, float], tuple] | None = None
    events: tuple[EventSpec, ...] = ()


@dataclass(frozen=True)
class FlowFns:
    """What a flow element contributes.

    ``flow(up, p_down, mode)`` — for an element that discharges to the
    surroundings — receives the upstream condition (an Outlet tuple, with the
    liquid head and any pump rise already added to its pressure) and the
    ambient pressure, and returns ``(mdot, v_e, p_e, A_e, dthrust_dp)``: mass
    flow (kg/s, >= 0), exit velocity relative to the vehicle (m/s), exit
    pressure (Pa), exit area over which p_e acts (m^2), and the derivative of
    the thrust magnitude with respect to the upstream pressure (N/Pa; used to
    solve the head-acceleration coupling).

    ``rise(up, mdot, mode)`` — for an element in series (a pump, a valve, a
    line loss) — returns the pressure rise across the element at mass flow
    ``mdot`` (Pa; negative for a loss). An element may provide both.

    ``jet_dir`` is the body-frame direction of the exhaust; ``events`` use the
    pressure at the element's inlet minus ambient as ``drive`` (terminal
    elements); ``signals(up, p_down, mode)`` receives the condition at the
    element's inlet (an Outlet tuple) and the ambient pressure, and returns
    named SI values for the results (e.g. a nozzle's flow regime), or the
    attribute is None.
    """

    flow: Callable[[tuple, float, int], tuple] | None = None
    jet_dir: tuple[float, float, float] = (-1.0, 0.0, 0.0)
    rise: Callable[[tuple, float, int], float] | None = None
    events: tuple[EventSpec, ...] = ()
    signals: Callable[[tuple, float, int], dict] | None = None


@dataclass(frozen=True)
class SourceFns:
    """What a source contributes: fluid entering the vehicle from outside (an inlet, a supply hose).

    ``supply(t, s, mode, air)`` receives ``air`` as for bodies and returns
    ``(up, mdot_fixed, vin_x, vin_y, vin_z)``: the condition of the entering
    fluid as an Outlet tuple (its pressure after any inlet loss), the mass flow
    when the source fixes it (kg/s) or -1.0 when the downstream elements set it,
    and the velocity of the entering fluid relative to the vehicle (m/s,
    world frame). Its momentum ``mdot * vin`` enters the balance (for an inlet
    that is the ram drag). A source holds no mass: what enters leaves.

    Optional: ``rise(up, mdot, mode)`` is the pressure change between the
    supply and the vehicle at mass flow ``mdot`` (Pa, negative for a hose
    loss); the line solve treats it as the first element in series.
    ``inflow(mdot, up)`` returns the world-frame velocity of the entering
    fluid relative to the vehicle when it depends on the flow (a hose whose
    fluid speed is mdot / (rho A)); it then replaces ``vin`` of ``supply``.
    """

    supply: Callable[[float, list, int, tuple], tuple]
    signals: Callable[[float, list, int], dict] | None = None
    events: tuple[EventSpec, ...] = ()
    rise: Callable[[tuple, float, int], float] | None = None
    inflow: Callable[[float, tuple], tuple] | None = None


@dataclass(frozen=True)
class JetFns:
    """What a prescribed jet contributes.

    jet(t, s, mode, p_a) -> (mdot, v_e, p_e, A_e); mass(s) -> kg;
    derivs(t, s, mode, mdot) -> tuple; signals(t, s, mode) -> dict.
    """

    mass: Callable[[list], float]
    jet: Callable[[float, list, int, float], tuple]
    derivs: Callable[[float, list, int, float], tuple]
    signals: Callable[[float, list, int], dict]
    jet_dir: tuple[float, float, float] = (-1.0, 0.0, 0.0)
    events: tuple[EventSpec, ...] = ()


class _Declared:
    """What every registered kind has: a name, a summary and typed parameters."""

    kind: ClassVar[str] = ""
    summary: ClassVar[str] = ""
    parameters: ClassVar[tuple[Spec, ...]] = ()
    _params_class: ClassVar[type | None] = None

    @classmethod
    def params_class(cls) -> type:
        """The frozen dataclass holding this kind's SI parameter values."""
        if cls.__dict__.get("_params_class") is None:
            cls._params_class = make_params_class(cls.kind or cls.__name__, cls.parameters)
        return cls._params_class  # type: ignore[return-value]

    @classmethod
    def check(cls, p: Any, where: str) -> None:
        """Refuse parameter combinations that make no physical sense."""


class ComponentKind(_Declared):
    """Base class of every device kind. See the module docstring for the contract."""

    role: ClassVar[str] = ""
    states: ClassVar[tuple[StateVar, ...]] = ()
    modes: ClassVar[tuple[Mode, ...]] = ()
    stores_pressure: ClassVar[bool] = False
    #: True when the callables are written once for floats and arrays (:mod:`thrustgraph.base.xp`; ensembles).
    vectorised: ClassVar[bool] = False
    #: SI units of the signals this kind reports (signal key -> unit, ``""`` for a pure number), for results, CSV
    #: headers, plots and triggers: every key but the standard ones (:data:`thrustgraph.flight.result.STANDARD_KEY_UNITS`)
    #: must be declared here (the contract refuses a signal with no unit when a vehicle is assembled).
    signal_units: ClassVar[dict[str, str]] = {}
    #: The outcomes :meth:`summarize` returns, each declared once (key, quantity, SI and display unit, label,
    #: meaning): they join the outcome registry (:mod:`thrustgraph.balance.outcomes`), which refuses a key declared twice
    #: or defined differently by two kinds.
    outcomes: ClassVar[tuple[OutcomeSpec, ...]] = ()
    #: Signals whose changes of value are entries of the event log (a nozzle's flow regime).
    logged: ClassVar[tuple[LoggedSignal, ...]] = ()

    #: A flow element that takes ``approach_area`` in :meth:`build_flow` (see item 10 of the contract).
    takes_approach_area: ClassVar[bool] = False

    @classmethod
    def approach_area(cls, p: Any) -> Any:
        """For a volume: the cross-section (m^2) through which its contents approach the outlet, or None when
        unknown (the default). A flow element fed directly by this volume may use it (``takes_approach_area``)."""
        return None

    @classmethod
    def summarize(cls, name: str, p: Any, result: Any) -> dict[str, float]:
        """Headline numbers of this component after a run (e.g. a parachute's deployment speed), SI.

        Called once per finished run with the component's name, its parameters and the FlightResult; returns
        values of outcomes the kind declares in :attr:`outcomes`. The entries appear in the result's summary
        as ``NAME.KEY``, labelled ``NAME label``.
        """
        return {}

    @classmethod
    def cautions(cls, p: Any) -> list[str]:
        """Safety cautions this component adds to a model that uses it."""
        return []

    @classmethod
    def flight_cautions(cls, name: str, p: Any, result: Any) -> list[str]:
        """Safety cautions that depend on what happened in a run (a tank that got cold, a nozzle whose flow may
        separate), from the finished FlightResult; they follow the model's cautions."""
        return []

    # --- initial state ------------------------------------------------------
    @classmethod
    def initial_state(cls, p: Any, amb: Ambient) -> tuple[float, ...]:
        """Initial values of ``states`` in SI."""
        return ()

    @classmethod
    def initial_mode(cls, p: Any, amb: Ambient) -> str:
        """Name of the mode the component starts in."""
        return cls.modes[0].name if cls.modes else ""

    @classmethod
    def describe_mass(cls, p: Any, amb: Ambient) -> dict[str, float]:
        """Mass breakdown at launch, kg, for validation listings."""
        return {}

    # --- builders (one per role) ----------------------------------------------
    @classmethod
    def build_body(cls, p: Any, ops: Any, i: int = -1, amb: Ambient | None = None) -> BodyFns:  # pragma: no cover
        """Bodies without states are called as ``build_body(p, ops)``; with states, ``i`` and ``amb`` follow."""
        raise NotImplementedError

    @classmethod
    def build_volume(cls, p: Any, i: int, ops: Any, amb: Ambient) -> VolumeFns:  # pragma: no cover - abstract
        raise NotImplementedError

    @classmethod
    def build_flow(cls, p: Any, ops: Any) -> FlowFns:  # pragma: no cover - abstract
        raise NotImplementedError

    @classmethod
    def build_jet(cls, p: Any, i: int, ops: Any, amb: Ambient) -> JetFns:  # pragma: no cover - abstract
        raise NotImplementedError

    @classmethod
    def build_source(cls, p: Any, i: int, ops: Any, amb: Ambient) -> SourceFns:  # pragma: no cover - abstract
        raise NotImplementedError


class EnvironmentKind(_Declared):
    """Base class of environment models: a medium or a gravity field.

    ``slot`` is ``"medium"`` or ``"gravity"``. For a medium, :meth:`build`
    returns ``fn(z, t) -> (rho, p, T, wind_x, wind_y, wind_z)`` in SI at
    altitude ``z`` (m above the launch datum) and time ``t``. For gravity it
    returns ``fn(z) -> g`` (m/s^2, acting along -z).
    """

    slot: ClassVar[str] = ""

    @classmethod
    def build(cls, p: Any, ops: Any) -> Callable:  # pragma: no cover - abstract
        raise NotImplementedError
