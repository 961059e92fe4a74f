"""The ``linedrop`` command: a thin dispatcher over the harness's subcommands."""
import argparse
import os
import sys

from algo.config import ConfigError
from harness.atomic import finished
from harness.errors import InputError
from harness.cli import bench, check_port, design, replay, simulate, tune, vectors
from harness.cli.version import tool_version

COMMANDS = [simulate, replay, bench, design, tune, vectors, check_port]


class Parser(argparse.ArgumentParser):
    """argparse, with a usage error in one line (the option, the value and what is allowed)."""

    def error(self, message):
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def build_parser():
    parser = Parser(
        prog="linedrop",
        description="Sense-wire-free line-drop compensation: model, C reference and harness.")
    parser.add_argument("--version", action="version", version=tool_version())
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for mod in COMMANDS:
        mod.add_parser(sub)
    return parser


def _left(args, mark):
    """What a failed or interrupted run leaves: the outputs it finished (those swapped in after
    the first ``mark`` of harness.atomic.finished), the rest untouched."""
    done = finished()[mark:]
    left = ("no output was replaced" if not done else
            f"finished before it stopped: {', '.join(done)}; no other output was replaced")
    note = getattr(sys.modules.get(args.func.__module__), "ON_STOP", "")
    return left + (f"; {note}" if note else "")


def main(argv=None):
    """Entry point; returns the exit status (0 ok, 1 check failed or the run failed, 2 bad input,
    130 interrupted, 141 the reader of the output went away)."""
    args = build_parser().parse_args(argv)
    mark = len(finished())
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
    except OSError as exc:
        # A write failing mid-run (disk full, a folder removed under it): one line, no traceback.
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"linedrop {args.command}: error: {where}{exc.strerror or exc}; {_left(args, mark)}",
              file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print(f"linedrop {args.command}: interrupted; {_left(args, mark)}", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
