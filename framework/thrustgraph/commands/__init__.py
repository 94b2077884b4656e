"""Sub-commands of the ``thrustgraph`` command line, one module each.

A module exposes ``NAME`` (the word typed), ``HELP`` (one line, kept in
:data:`SUMMARIES`), ``add_arguments(parser)`` and ``main(args) -> int``; list
it in :data:`SUMMARIES`. Shared option helpers live in
:mod:`thrustgraph.commands.common`.

The one-line helps live here, not in the modules, so that ``thrustgraph
--help`` lists every command without importing any of them: the command line
imports only the module of the command it runs (:mod:`thrustgraph.cli`).

>>> list(SUMMARIES)[:3]
['run', 'compare', 'overlay']
"""

__all__ = ["SUMMARIES"]

#: Every sub-command, in the order ``thrustgraph --help`` lists them, and its one-line help.
SUMMARIES = {
    "run": "fly a model and print the summary (burn time, peak thrust and acceleration, apogee or range, audits)",
    "compare": "compare a model's prediction with a measured record (CSV with units in the headers): metrics and "
               "plots",
    "overlay": "overlay several runs (models, --variant changes, saved results, measured records): one set of plots "
               "and one table of outcome differences",
    "calibrate": "fit uncertain parameters (discharge coefficient, expansion exponent, drag...) to measured records; "
                 "report them with confidence intervals and write a calibrated model",
    "check": "validate a model without flying it: components, graph, mass at launch and safety cautions",
    "kinds": "list the installed device and environment kinds with their parameters, units, ranges and defaults",
    "new": "create a model file from a bundled starter scenario (list them with --list)",
    "export": "fly a model and write its results: CSV time series, JSON summary, Parquet (when pyarrow is "
              "installed)",
    "graph": "draw a model's component graph to an image (PNG or SVG)",
    "plot": "fly a model and draw its plots (thrust, motion, balance ledger...; --only lists them all) as PNG or SVG",
    "report": "fly a model and write a self-contained HTML report (summary, plots, ledger audit, events, model, "
              "versions)",
    "study": "run a design study: a sweep, an optimisation, a dispersion (Monte Carlo) or local sensitivities, "
             "on this machine's cores or a Dask cluster",
}
