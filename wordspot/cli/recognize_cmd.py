"""``wordspot recognize``: not built yet (see the open issues)."""

import sys

__all__ = ["add_parser"]


def add_parser(sub):
    p = sub.add_parser("recognize", help="(not yet available)")
    p.set_defaults(func=_run)
    return p


def _run(args):
    print("wordspot recognize: not yet available in this version; see the project's open issues.", file=sys.stderr)
    return 3
