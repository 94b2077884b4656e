"""The exception hierarchy of thrustgraph.

Every error a user can cause carries three things: *where* it happened (a file
and a key path such as ``components.bottle.volume``), *what* was wrong, and
*how to fix it*. The command line prints the message and exits with status 2.

Examples
--------
>>> err = ModelError("components.bottle.volume", "must be positive, got -1 L",
...                  "give the bottle's internal volume, e.g. \\"2 L\\"")
>>> print(err)
components.bottle.volume: must be positive, got -1 L. Fix: give the bottle's internal volume, e.g. "2 L".
"""

from __future__ import annotations

__all__ = ["ThrustgraphError", "ModelError", "PluginError", "ContractError", "IntegrationError"]


class ThrustgraphError(Exception):
    """Base class of every error thrustgraph raises on purpose."""


class ModelError(ThrustgraphError):
    """A model (file, parameters or graph) is not valid.

    Parameters
    ----------
    where : str
        Key path of the offending item, optionally prefixed by the file name.
    what : str
        What is wrong, with the value that was found.
    fix : str
        How to fix it.
    """

    def __init__(self, where: str, what: str, fix: str = "") -> None:
        self.where = where
        self.what = what
        self.fix = fix
        text = f"{where}: {what}" if where else what
        if fix:
            fix = fix.rstrip(".")
            text += f". Fix: {fix}" + ("" if fix.endswith(("?", "!")) else ".")
        super().__init__(text)

    def located(self, prefix: str) -> "ModelError":
        """Return a copy whose location is prefixed (e.g. by a file name)."""
        where = f"{prefix}: {self.where}" if self.where else prefix
        return ModelError(where, self.what, self.fix)


class PluginError(ThrustgraphError):
    """A plugin broke the contract (duplicate kind, bad declaration)."""


class ContractError(PluginError):
    """A component kind broke the plugin contract of :mod:`thrustgraph.component`.

    Raised when kinds are registered (a parameter default without its unit, a
    key declared twice, a builder that cannot be called as documented) and when
    a vehicle is assembled (a callable with the wrong signature, a result of the
    wrong shape or not finite at the initial state). It is the plugin's fault,
    not the model file's: ``where`` names the plugin (entry point,
    distribution, module), the kind and the hook.

    Parameters
    ----------
    where : str
        The plugin, the kind and the hook or declaration at fault.
    what : str
        What the contract expects and what was found.
    fix : str
        What the plugin's author should change.

    Examples
    --------
    >>> print(ContractError("plugin 'demo', kind 'jet-x' (jet), JetFns.jet", "returned 3 values, expected 4",
    ...                     "return (mdot, v_e, p_e, A_e)"))
    plugin 'demo', kind 'jet-x' (jet), JetFns.jet: returned 3 values, expected 4. Fix: return (mdot, v_e, p_e, A_e).
    """

    def __init__(self, where: str, what: str, fix: str = "") -> None:
        self.where, self.what, self.fix = where, what, fix
        fix = fix.rstrip(".")
        super().__init__(f"{where}: {what}" + (f". Fix: {fix}." if fix else ""))

    def __reduce__(self):  # keep the three parts when a worker process sends the error back
        return (type(self), (self.where, self.what, self.fix))


class IntegrationError(ThrustgraphError):
    """The integrator could not complete a flight."""
