"""Subcommands beyond ``validate``: argument definitions and their calls into the API."""
from __future__ import annotations

import argparse


def register(sub) -> None:
    """Add the ``build`` and ``check`` subcommands to the parser ``sub``."""
    p = sub.add_parser("build", help="derive curvature and write a report",
                       description="Derive everything and write a LaTeX, Markdown or JSON report.")
    p.add_argument("files", nargs="+", metavar="FILE", help="spacetime files or folders")
    p.add_argument("-o", "--output", metavar="OUT", help="output file (.tex, .md, .json) or folder")
    p.set_defaults(run=_not_ready)

    p = sub.add_parser("check", help="decide the claims written in spacetime files",
                       description="Decide every claim; exit 0 if all hold, 1 if any fails, 2 for bad input.")
    p.add_argument("files", nargs="+", metavar="FILE", help="spacetime files or folders")
    p.set_defaults(run=_not_ready)


def _not_ready(args: argparse.Namespace) -> int:
    from .errors import TexgenError

    raise TexgenError(f"'texgen {args.command}' is not available in this version")
