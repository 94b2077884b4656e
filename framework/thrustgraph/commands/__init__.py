"""Sub-commands of the ``thrustgraph`` command line, one module each.

A module exposes ``NAME`` (the word typed), ``HELP`` (one line),
``add_arguments(parser)`` and ``main(args) -> int``; list it in
:data:`thrustgraph.cli.COMMANDS`. Shared option helpers live in
:mod:`thrustgraph.commands.common`.
"""
