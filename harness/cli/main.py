"""The ``linedrop`` command: a thin dispatcher over the harness's subcommands."""
import argparse
import os
import sys

from algo.config import ConfigError
from harness.errors import InputError
from harness.cli import bench, check_port, design, replay, simulate, tune, vectors
from harness.cli.version import tool_version

COMMANDS = [simulate, replay, bench, design, tune, vectors, check_port]


def build_parser():
    parser = argparse.ArgumentParser(
        prog="linedrop",
        description="Sense-wire-free line-drop compensation: model, C reference and harness.")
    parser.add_argument("--version", action="version", version=tool_version())
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
    except BrokenPipeError:
        # The reader went away (``linedrop design ... | head``): stop quietly, as Unix tools do.
        # Point stdout at /dev/null so the interpreter's final flush cannot raise again.
        try:
            os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        except (OSError, ValueError, AttributeError):
            pass
        return 141
    except KeyboardInterrupt:
        print(f"linedrop {args.command}: interrupted; no output was replaced", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
