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

__all__ = ["ThrustgraphError", "ModelError", "PluginError", "IntegrationError", "OutputError"]


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


class IntegrationError(ThrustgraphError):
    """The integrator could not complete a flight."""


class OutputError(ThrustgraphError):
    """An output file cannot be written (checked before the work is done, so nothing is half-written).

    Parameters
    ----------
    path : str
        The output path as the user gave it.
    what : str
        Why it cannot be written.
    fix : str
        How to fix it.

    >>> print(OutputError("out/a.csv", "the folder out does not exist", "create it first"))
    cannot write out/a.csv: the folder out does not exist. Fix: create it first.
    """

    def __init__(self, path: str, what: str, fix: str = "") -> None:
        self.path = path
        self.what = what
        self.fix = fix
        text = f"cannot write {path}: {what}"
        if fix:
            text += f". Fix: {fix.rstrip('.')}."
        super().__init__(text)
