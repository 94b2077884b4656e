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

__all__ = ["ThrustgraphError", "ModelError", "PluginError", "ContractError", "IntegrationError", "OutputError", "shorten",
           "ECHO_LENGTH", "screened_note"]

#: How many characters of a user's input a message echoes before it is cut.
ECHO_LENGTH = 80
# Longest key path and text of each part of a message: a safety net for paths built from long names.
_PART_LENGTH = 600


def shorten(value: object, n: int = ECHO_LENGTH) -> str:
    """The ``repr`` of a value (text as it is), cut to ``n`` characters and an ellipsis.

    >>> shorten("5 bar"), shorten(0.25)
    ("'5 bar'", '0.25')
    >>> shorten("x" * 1000, 10)
    "'xxxxxxxx…"
    """
    if isinstance(value, str) and len(value) > 20 * n:
        value = value[: 20 * n]  # repr of a huge string costs time: cut before
    text = repr(value) if not isinstance(value, (list, tuple, dict)) or _small(value) else _repr_cut(value, n)
    return text if len(text) <= n else text[: n - 1] + "…"


def _small(value: object, budget: int = 1000) -> bool:
    """Is a container's repr cheap (few items)?"""
    stack, seen = [value], 0
    while stack:
        v = stack.pop()
        seen += 1
        if seen > budget:
            return False
        if isinstance(v, (list, tuple)):
            stack.extend(v[:budget])
        elif isinstance(v, dict):
            stack.extend(list(v.values())[:budget])
        elif isinstance(v, str) and len(v) > budget:
            return False
    return True


def _repr_cut(value: object, n: int) -> str:
    """The opening of a large (or deeply nested) container's repr without building all of it."""
    out: list[str] = []
    size = 0

    def walk(v: object, depth: int) -> None:
        nonlocal size
        if size > n or depth > n:
            return
        if isinstance(v, (list, tuple)):
            out.append("["); size += 1
            for k, item in enumerate(v):
                if size > n:
                    return
                if k:
                    out.append(", "); size += 2
                walk(item, depth + 1)
            out.append("]"); size += 1
        elif isinstance(v, dict):
            out.append("{"); size += 1
            for k, (key, item) in enumerate(v.items()):
                if size > n:
                    return
                text = ("" if not k else ", ") + repr(key)[:n] + ": "
                out.append(text); size += len(text)
                walk(item, depth + 1)
            out.append("}"); size += 1
        else:
            text = repr(v[: n + 2] if isinstance(v, str) else v)[: n + 2]
            out.append(text); size += len(text)

    walk(value, 0)
    text = "".join(out)
    return text[: n - 1] + "…" if len(text) >= n else text


def _cut(text: str, n: int = _PART_LENGTH) -> str:
    return text if len(text) <= n else text[: n // 2 - 1] + "…" + text[-(n // 2):]


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
        where, what, fix = _cut(where), _cut(what), _cut(fix)
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
    """A component kind broke the plugin contract of :mod:`thrustgraph.kinds.component`.

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


def screened_note(exc: BaseException) -> str:
    """The note of a study's row for a design screened out because its flight raised ``exc`` (a design's model
    error, an integration failure, another deliberate error, or a numerical one): one wording for single flights
    and ensembles.

    >>> screened_note(IntegrationError("components.jet: cannot pass the flow its supply fixes"))
    'integration failed: components.jet: cannot pass the flow its supply fixes'
    >>> screened_note(ZeroDivisionError("float division by zero"))
    'integration failed: ZeroDivisionError: float division by zero'
    """
    if isinstance(exc, ModelError):
        return f"model error: {exc}"
    if isinstance(exc, IntegrationError):
        return f"integration failed: {exc}"
    if isinstance(exc, ThrustgraphError):
        return f"error: {exc}"
    return f"integration failed: {type(exc).__name__}: {exc}"
