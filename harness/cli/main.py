"""The ``linedrop`` command: a thin dispatcher over the harness's subcommands.

Only the standard library is imported before ``main`` runs: the subcommands (numpy, the
harness) are imported inside it, so a Ctrl-C while they load ends in one line too.
"""
import argparse
import os
import signal
import sys

from harness.atomic import finished
from harness.errors import InputError


#: Subcommand names and their modules (harness.cli.<module>), in the order ``--help`` lists them.
COMMANDS = (("simulate", "simulate"), ("replay", "replay"), ("bench", "bench"), ("design", "design"),
            ("tune", "tune"), ("spread", "spread"), ("vectors", "vectors"), ("check-port", "check_port"),
            ("prove", "prove"))


def commands(name=None):
    """The subcommand modules, in the order ``--help`` lists them; only ``name``'s where it is one.

    Importing every subcommand takes longer than a short simulation, so a command line naming
    one imports that one alone."""
    import importlib
    known = dict(COMMANDS)
    wanted = [known[name]] if name in known else [m for _, m in COMMANDS]
    return [importlib.import_module(f"harness.cli.{m}") for m in wanted]


class Terminated(KeyboardInterrupt):
    """SIGTERM (``kill``, a service stopping, a batch job cancelled), raised where the run is so
    it stops as Ctrl-C does: outputs left as they were, one line, exit status 143 (128 + 15)."""


def _on_sigterm(signum, frame):
    raise Terminated


class UsageError(InputError):
    """A command line argparse refused; ``main`` prints it as one line, exit status 2."""


class Parser(argparse.ArgumentParser):
    """argparse, with a usage error in one line (the option, the value and what is allowed)."""

    def error(self, message):
        raise UsageError(f"{self.prog}: error: {message} (see {self.prog} --help)")


class _Version(argparse.Action):
    """``--version``: the version is looked up only when asked for (the package metadata is slow to read)."""

    def __init__(self, option_strings, dest, **kwargs):
        super().__init__(option_strings, dest, nargs=0, help="show the version and exit", **kwargs)

    def __call__(self, parser, namespace, values, option_string=None):
        from harness.cli.version import tool_version
        print(tool_version())
        parser.exit()


def build_parser(argv=None):
    """The parser; with ``argv`` (the arguments, without the program name) starting with a
    subcommand's name, the parser knows that subcommand only."""
    parser = Parser(
        prog="linedrop",
        description="Sense-wire-free line-drop compensation: model, C reference and harness.")
    parser.add_argument("--version", action=_Version)
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for mod in commands(argv[0] if argv else None):
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


def _stopped(exc):
    """The word and exit status for a run stopped by ``exc`` (Ctrl-C or SIGTERM)."""
    return ("terminated", 143) if isinstance(exc, Terminated) else ("interrupted", 130)


def main(argv=None):
    """Entry point; returns the exit status (0 ok, 1 check failed or the run failed, 2 bad input,
    130 interrupted, 141 the reader of the output went away, 143 terminated by SIGTERM)."""
    own = signal.getsignal(signal.SIGTERM) == signal.SIG_DFL
    try:
        if own:
            signal.signal(signal.SIGTERM, _on_sigterm)
    except ValueError:                   # not the main thread: leave signals to the caller
        own = False
    try:
        return _main(argv)
    finally:
        if own:
            signal.signal(signal.SIGTERM, signal.SIG_DFL)


def _main(argv):
    try:
        parser = build_parser(sys.argv[1:] if argv is None else list(argv))
        from algo.config import ConfigError
    except KeyboardInterrupt as exc:
        word, status = _stopped(exc)
        print(f"linedrop: {word}; no output was replaced", file=sys.stderr)
        return status
    try:
        args = parser.parse_args(argv)
    except UsageError as exc:
        print(exc, file=sys.stderr)
        return 2
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
    except KeyboardInterrupt as exc:
        word, status = _stopped(exc)
        print(f"linedrop {args.command}: {word}; {_left(args, mark)}", file=sys.stderr)
        return status


if __name__ == "__main__":
    sys.exit(main())
