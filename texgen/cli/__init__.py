"""The ``texgen`` command: a thin layer over :mod:`texgen.api`.

``commands`` holds ``build``, ``demo`` and ``check``, ``library_commands`` the
``library``, ``diff`` and ``cache`` commands, ``progress`` the terminal progress bar.

Exit codes: 0 success, 1 a claim failed, 2 bad input or usage, 3 internal
error (the traceback goes to a log file, never the terminal), 130 interrupted
by SIGINT (Ctrl-C), 143 stopped by SIGTERM (128 + the signal number, as shells
report it). Both signals unwind the same way: temporary files are removed and
reports already written, or written before, stay intact.
"""
from __future__ import annotations

import argparse
import os
import signal
import sys
import tempfile
import traceback
from typing import Callable, Sequence

from .. import api
from ..errors import ClaimFailed, ConfigError, DerivationError, RenderError, TexgenError

EXIT_OK, EXIT_CLAIM, EXIT_INPUT, EXIT_INTERNAL, EXIT_INTERRUPTED = 0, 1, 2, 3, 130
EXIT_TERMINATED = 143


class _Terminated(KeyboardInterrupt):
    """SIGTERM turned into an exception, so it unwinds (and cleans up) like Ctrl-C."""


def _on_sigterm(signum, frame) -> None:
    raise _Terminated()


class _Parser(argparse.ArgumentParser):
    """argparse that reports usage errors with texgen's exit code 2 and no traceback."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.print_usage(sys.stderr)
        print(f"error: {message}", file=sys.stderr)
        raise SystemExit(EXIT_INPUT)


def _summary(model) -> str:
    coords = ", ".join(c.name for c in model.coordinates)
    params = ", ".join(p.name for p in model.parameters) or "none"
    funcs = ", ".join(f"{f.name}({', '.join(map(str, f.arguments))})" for f in model.functions) or "none"
    return (f"{model.source}: valid: '{model.id}' {model.version}, {model.dimension} dimensions ({coords}); "
            f"parameters: {params}; functions: {funcs}; signature {model.conventions.signature}")


def cmd_validate(args: argparse.Namespace) -> int:
    failed = False
    files = api.spacetime_files(args.files)
    if not files:
        # A folder without spacetime files must not pass as "all valid".
        print("error: no spacetime files (.yaml, .yml) found in " + ", ".join(args.files), file=sys.stderr)
        return EXIT_INPUT
    for path in files:
        try:
            model = api.load_spacetime(path)
        except ConfigError as exc:
            print(f"error: {exc.format_message()}", file=sys.stderr)
            failed = True
            continue
        if not args.quiet:
            print(_summary(model))
    return EXIT_INPUT if failed else EXIT_OK


def build_parser() -> argparse.ArgumentParser:
    from .._version import __version__

    parser = _Parser(prog="texgen", description="Exact curvature and derivation reports from YAML spacetime files.")
    parser.add_argument("--version", action="version", version=f"texgen {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    p = sub.add_parser("validate", help="check spacetime files and print a summary of each",
                       description="Check spacetime files; exit 0 if all are valid, 2 otherwise.")
    p.add_argument("files", nargs="+", metavar="FILE", help="spacetime files or folders of them")
    p.add_argument("-q", "--quiet", action="store_true", help="print only errors")
    p.set_defaults(run=cmd_validate)

    from . import commands, library_commands  # the other subcommands, kept apart to keep this file thin

    commands.register(sub)
    library_commands.register(sub)
    return parser


def _log_internal(exc: BaseException) -> str:
    path = os.path.join(tempfile.gettempdir(), "texgen-error.log")
    try:
        with open(path, "a", encoding="utf-8") as fh:
            fh.write("".join(traceback.format_exception(type(exc), exc, exc.__traceback__)) + "\n")
    except OSError:
        return "(no log could be written)"
    return path


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit code (the console script exits with it)."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:
        return int(exc.code or 0)
    if not getattr(args, "run", None):
        parser.print_help(sys.stderr)
        return EXIT_INPUT
    run: Callable[[argparse.Namespace], int] = args.run
    installed, previous = False, None
    try:
        # Only the main thread may set handlers; elsewhere SIGTERM keeps its default.
        previous = signal.signal(signal.SIGTERM, _on_sigterm)
        installed = True
    except ValueError:
        pass
    try:
        return run(args)
    except ClaimFailed as exc:
        print(f"error: {exc.format_message()}", file=sys.stderr)
        return EXIT_CLAIM
    except (ConfigError, RenderError, DerivationError, TexgenError) as exc:
        print(f"error: {exc.format_message()}", file=sys.stderr)
        return EXIT_INPUT
    except _Terminated:
        print("error: terminated; outputs already written are intact", file=sys.stderr)
        return EXIT_TERMINATED
    except KeyboardInterrupt:
        print("error: interrupted; outputs already written are intact", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # noqa: BLE001 - the promise is: never a raw traceback
        log = _log_internal(exc)
        print(f"error: internal error ({type(exc).__name__}: {exc}); details in {log}", file=sys.stderr)
        return EXIT_INTERNAL
    finally:
        if installed:
            signal.signal(signal.SIGTERM, signal.SIG_DFL if previous is None else previous)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
