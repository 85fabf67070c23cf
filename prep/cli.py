"""Command-line entry point: ``headprep COMMAND ...``.

Thin: parses arguments, builds one registry per invocation, dispatches to
``prep.commands.<name>``, and maps outcomes to exit statuses:

0 no ``fail`` finding; 1 at least one ``fail`` finding; 2 the invocation or an
input could not be used (one line on stderr naming file and line); 3 an
internal error (the kit or a named plugin crashed; ``--debug`` shows the
traceback).
"""
from __future__ import annotations

import argparse
import importlib
import sys
import traceback
from collections.abc import Sequence

from .console import EXIT_INTERNAL, EXIT_OK, EXIT_USAGE, Context
from .errors import HeadprepError, PluginError, UsageError

#: command name -> module under prep.commands (each has ``add_arguments`` and ``run``)
COMMANDS: dict[str, str] = {
    "demo": "demo", "run": "run", "batch": "batch",
    "inspect": "inspect", "template": "template", "new-reader": "new_reader",
    "align": "align", "patches": "patches", "layers": "layers", "forward": "forward",
    "check": "check", "selftest": "selftest",
    "verify": "verify", "export": "export", "report": "report",
    "plugins": "plugins",
}

def _common() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(add_help=False)
    p.add_argument("--debug", action="store_true", help="show full tracebacks of internal errors")
    p.add_argument("--block", action="append", metavar="PLUGIN", default=[],
                   help="do not load this plugin (repeatable)")
    return p


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="headprep",
        description="Prepare EEG subjects for source analysis: electrodes, co-registration, "
                    "source patches, head model, lead field, checks and a verified bundle.")
    parser.add_argument("--version", action="store_true", help="print the kit's and plugins' versions")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    common = _common()
    for name, module in COMMANDS.items():
        mod = importlib.import_module(f"prep.commands.{module}")
        p = sub.add_parser(name, parents=[common], help=mod.HELP, description=getattr(mod, "DESCRIPTION", mod.HELP),
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        mod.add_arguments(p)
        p.set_defaults(_module=mod)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.version:
        from . import __version__
        sys.stdout.write(f"headprep {__version__}\n")
        return EXIT_OK
    if not args.command:
        parser.print_help()
        return EXIT_USAGE
    ctx = Context(args)
    try:
        return int(args._module.run(args, ctx))
    except UsageError as exc:
        if ctx.debug:
            traceback.print_exc()
        sys.stderr.write(f"headprep {args.command}: {exc}\n")
        return EXIT_USAGE
    except PluginError as exc:
        if ctx.debug:
            traceback.print_exc()
        sys.stderr.write(f"headprep {args.command}: internal error: {exc} (run with --debug for the traceback)\n")
        return EXIT_INTERNAL
    except HeadprepError as exc:
        if ctx.debug:
            traceback.print_exc()
        sys.stderr.write(f"headprep {args.command}: {exc}\n")
        return exc.exit_status
    except KeyboardInterrupt:
        sys.stderr.write("headprep: interrupted\n")
        return 130
    except Exception as exc:  # a bug in the kit itself: wrapped, never swallowed
        if ctx.debug:
            traceback.print_exc()
        sys.stderr.write(f"headprep {args.command}: internal error in the kit: {type(exc).__name__}: {exc} "
                         f"(run with --debug for the traceback)\n")
        return EXIT_INTERNAL


def entry() -> None:
    """Console-script entry point."""
    sys.exit(main())
