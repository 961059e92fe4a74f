"""The ``linedrop`` command: ``main`` dispatches to one module per subcommand.

Subcommands: ``simulate``, ``replay``, ``bench``, ``design``, ``tune``, ``vectors``,
``check_port``; each module offers ``add_parser(sub)`` and its ``run(args)``.
"""
from harness.cli.main import main

__all__ = ["main"]
