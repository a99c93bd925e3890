"""The `truepull` command: one sub-command (verb) per module of this package.

Each verb module defines HELP (one line), add_arguments(parser) and run(args) -> exit code.
Bad input raises InputError, printed here as one line on stderr with exit code 2; any other
failure is an internal error, one line and exit code 1 (set TRUEPULL_DEBUG=1 for the traceback).
Exit codes are listed in EXIT_CODES (shown in --help).
"""

from __future__ import annotations

import argparse
import importlib
import os
import re
import sys

from truepull.geometry.errors import InputError

# verb -> module (imported only when that verb runs, so start-up stays quick)
VERBS = {
    "check": "truepull.cli.check",
    "compare": "truepull.cli.compare",
    "scan": "truepull.cli.scan",
    "bias": "truepull.cli.bias",
    "fit": "truepull.cli.fit",
    "reduce": "truepull.cli.reduce",
    "view": "truepull.cli.view",
    "mesh": "truepull.cli.mesh",
    "report": "truepull.cli.report",
    "field": "truepull.cli.field",
}

VERB_HELP = {
    "check": "load and validate a scene; bodies, mass properties, group totals, warnings",
    "compare": "exact force, torque and stiffness beside the point-mass model",
    "scan": "sweep a turn or a shift of a group; exact and point torque and stiffness",
    "bias": "sensitivity of torque and G to each body's placement, size and density",
    "fit": "fit a recorded angle-time run: period, decrement, equilibrium per position",
    "reduce": "G from the measurement, corrections itemised, uncertainty budget",
    "view": "3-D picture of the bodies and the attractor's field",
    "mesh": "inspect a mesh part file and print a [[body]] block for it",
    "report": "the whole job into a folder of Markdown, JSON and figures",
    "field": "potential, field and gradient tensor of a group at points, with error estimates",
}


EXIT_CODES = """exit codes:
  0    done
  1    internal error (one line; TRUEPULL_DEBUG=1 shows the traceback)
  2    bad input or an unusable output place (one line on stderr: file, key, reason)
  3    done and printed, but an engine did not reach the asked tolerance (compare, scan, bias, reduce,
       report, view's field); the result carries the error estimates reached
  130  interrupted (Ctrl-C)"""


class _OneLineParser(argparse.ArgumentParser):
    """argparse that reports usage errors in one line with exit code 2."""

    def error(self, message):  # noqa: D401 - argparse API
        sys.stderr.write(f"{self.prog}: {message}\n")
        raise SystemExit(2)


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("truepull")
    except Exception:  # not installed (running from a source tree)
        return "unknown"


class _VersionAction(argparse.Action):
    """--version: looks the installed version up only when asked (not at every start-up)."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS,
                 help="show program's version number and exit"):
        super().__init__(option_strings=option_strings, dest=dest, default=default, nargs=0, help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        sys.stdout.write(f"truepull {_version()}\n")
        parser.exit()


def build_parser(load_verbs: list[str] | None = None) -> argparse.ArgumentParser:
    parser = _OneLineParser(
        prog="truepull",
        description="Exact gravitational pull between extended bodies, beside the point-mass model.",
        epilog=EXIT_CODES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action=_VersionAction)
    sub = parser.add_subparsers(dest="verb", metavar="VERB", parser_class=_OneLineParser)
    for verb, modname in VERBS.items():
        p = sub.add_parser(verb, help=VERB_HELP[verb], description=VERB_HELP[verb])
        p.add_argument("--json", action="store_true", help="machine output (JSON) on stdout, nothing else")
        if load_verbs is None or verb in load_verbs:
            mod = importlib.import_module(modname)
            mod.add_arguments(p)
    return parser


# a range value that starts with a minus sign, e.g. "-10:10:1" or "-5:5" (argparse takes it for an option)
_NEGATIVE_RANGE = re.compile(r"^-(?:\d|\.\d)[\d.eE+-]*(?::[-+]?[\d.eE+-]*)+$")


def join_range_values(argv: list[str]) -> list[str]:
    """`--turn -10:10:1` -> `--turn=-10:10:1`: an option given without '=' and followed by a range
    that starts with a minus sign takes it as its value (there is no doubt: no option looks like that)."""
    out = []
    i = 0
    while i < len(argv):
        a = argv[i]
        if (a.startswith("--") and "=" not in a and a != "--" and i + 1 < len(argv)
                and _NEGATIVE_RANGE.match(argv[i + 1])):
            out.append(f"{a}={argv[i + 1]}")
            i += 2
            continue
        out.append(a)
        i += 1
    return out


def main(argv: list[str] | None = None) -> int:
    """Run one verb; returns the exit code (see EXIT_CODES)."""
    try:
        return _main(argv)
    except KeyboardInterrupt:  # Ctrl-C while starting up or parsing
        _quiet_interrupt()
        return 130


def _main(argv: list[str] | None) -> int:
    argv = join_range_values(list(sys.argv[1:] if argv is None else argv))
    verb = next((a for a in argv if not a.startswith("-")), None)
    parser = build_parser([verb] if verb in VERBS else [])
    args = parser.parse_args(argv)
    if args.verb is None:
        parser.print_help()
        return 2
    try:
        module = importlib.import_module(VERBS[args.verb])
        return int(module.run(args) or 0)
    except InputError as exc:
        sys.stderr.write(f"truepull {args.verb}: {exc.one_line()}\n")
        return 2
    except BrokenPipeError:  # output cut short by the reader (e.g. `| head`): not an error of ours
        try:
            sys.stdout = open(os.devnull, "w")
        except OSError:
            pass
        return 0
    except KeyboardInterrupt:  # Ctrl-C: quietly, with the shell's usual code (128 + SIGINT)
        _quiet_interrupt()
        return 130
    except Exception as exc:  # internal failure: one line, traceback only on request
        if os.environ.get("TRUEPULL_DEBUG"):
            raise
        msg = " ".join(str(exc).split()) or type(exc).__name__
        sys.stderr.write(f"truepull {args.verb}: internal error: {type(exc).__name__}: {msg}\n")
        return 1


def _quiet_interrupt() -> None:
    """After Ctrl-C: one line, and no second traceback from a repeated Ctrl-C or from exit handlers."""
    import signal

    try:
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    except (ValueError, OSError):  # not the main thread
        pass
    try:
        sys.stderr.write("truepull: interrupted\n")
    except OSError:
        pass


if __name__ == "__main__":
    raise SystemExit(main())
