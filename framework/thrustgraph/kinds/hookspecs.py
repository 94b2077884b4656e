"""The hook specifications of thrustgraph: the whole plugin contract in one place.

A plugin is a module (or object) with functions marked ``@hookimpl`` whose
names match the specs below, made known through the ``thrustgraph`` entry-point
group (``[project.entry-points.thrustgraph]`` in its pyproject.toml). The
built-in device families use that same group.

Every hook is called at load, validation or assembly time, never from inside
the integrator's right-hand side: the callables a component kind builds are
collected once, when a vehicle is assembled.

Examples
--------
>>> from thrustgraph import hookimpl
>>> class MyFamily:
...     @hookimpl
...     def thrustgraph_component_kinds(self):
...         return []
>>> from thrustgraph.models.plugins import get_plugin_manager
>>> pm = get_plugin_manager(autoload=False)
>>> pm.register(MyFamily(), name="my-family") == "my-family"
True
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Sequence

import pluggy

if TYPE_CHECKING:  # pragma: no cover
    from .component import ComponentKind, EnvironmentKind
    from .modeldata import ParsedModel

__all__ = ["hookspec", "hookimpl", "PROJECT"]

PROJECT = "thrustgraph"
hookspec = pluggy.HookspecMarker(PROJECT)
hookimpl = pluggy.HookimplMarker(PROJECT)


# ---------------------------------------------------------------------------
# Registration: called once per plugin manager, when a model is loaded or a
# vehicle assembled.
# ---------------------------------------------------------------------------

@hookspec
def thrustgraph_component_kinds() -> Sequence[type[ComponentKind]]:
    """Declare the component kinds (device types) a plugin provides.

    Called once per plugin manager; every implementation is called and the
    results are merged into one table keyed by ``kind``. Two plugins declaring
    the same kind is an error naming both.

    Returns
    -------
    sequence of ComponentKind subclasses
        Each with its ``kind``, ``role``, typed ``parameters`` (units, bounds,
        defaults), ``states`` and ``modes``.
    """


@hookspec
def thrustgraph_environment_kinds() -> Sequence[type[EnvironmentKind]]:
    """Declare environment models: media (air, water, vacuum) and gravity fields.

    Called once per plugin manager; all results are merged by ``kind``, and
    duplicates are refused. Media build ``fn(z, t) -> (rho [kg/m^3], p [Pa],
    T [K], wind_x, wind_y, wind_z [m/s])``; gravity fields build
    ``fn(z) -> g [m/s^2]``. A medium or field that is the same everywhere and
    always may say so by setting ``fn.uniform`` to its constant result (the
    tuple, or g); the generated right-hand side then uses that value instead of
    calling ``fn``. It must equal what ``fn`` returns.

    Returns
    -------
    sequence of EnvironmentKind subclasses
    """


# ---------------------------------------------------------------------------
# Validation: called once per model, after parameters are parsed and the
# graph is checked, before any integration.
# ---------------------------------------------------------------------------

@hookspec
def thrustgraph_check_model(model: ParsedModel) -> Sequence[str]:
    """Check a whole parsed model for problems a single component cannot see.

    Called once per validation with the :class:`~thrustgraph.models.model.ParsedModel`
    (SI values in ``model.params``, the graph in ``model.graph``). Every
    implementation is called.

    Returns
    -------
    sequence of str
        Error messages, each naming the component and parameter and how to fix
        it; an empty sequence when the model is fine. Any message stops the run.
    """


@hookspec
def thrustgraph_model_warnings(model: ParsedModel) -> Sequence[str]:
    """Point out what a valid model probably did not mean (an airframe with no drag data, a default left at zero).

    Called once per validation with the :class:`~thrustgraph.models.model.ParsedModel`; every implementation is
    called. Unlike :func:`thrustgraph_check_model` a warning does not stop anything: ``check`` lists the
    warnings and ``run`` prints them on standard error before it flies.

    Returns
    -------
    sequence of str
        One line each, starting with the key path of what it is about, saying what follows from it and how
        to change it if it was not meant (``"components.airframe: ...; to fix it, give ..."``).
    """


@hookspec
def thrustgraph_cautions(model: ParsedModel) -> Sequence[str]:
    """Add safety cautions for a model (stored pressure, flight, range safety).

    Called once per validation and per run with the
    :class:`~thrustgraph.models.model.ParsedModel`; every implementation is called and
    the cautions are shown together with those the component kinds give.
    Cautions never state a safe rating.

    Returns
    -------
    sequence of str
        Plain-English cautions.
    """
