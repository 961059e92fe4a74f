"""The ``linedrop`` command: a thin dispatcher over the harness's subcommands."""
import argparse
import sys

from algo.config import ConfigError
from harness.errors import InputError
from harness import cmd_bench, cmd_replay, cmd_simulate
from harness import cmd_design
from harness import cmd_tune
from harness import cmd_vectors
from harness import cmd_check_port

COMMANDS = [cmd_simulate, cmd_replay, cmd_bench, cmd_design, cmd_tune, cmd_vectors, cmd_check_port]


def build_parser():
    parser = argparse.ArgumentParser(
        prog="linedrop",
        description="Sense-wire-free line-drop compensation: model, C reference and harness.")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for mod in COMMANDS:
        mod.add_parser(sub)
    return parser


def main(argv=None):
    """Entry point; returns the exit status (0 ok, 1 check failed, 2 bad input)."""
    args = build_parser().parse_args(argv)
    try:
        return args.func(args) or 0
    except (InputError, ConfigError) as exc:
        print(f"linedrop {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"linedrop {args.command}: interrupted; no output was replaced", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
