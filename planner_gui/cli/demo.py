"""``acqplan demo``: write the invented demo into a folder."""

from __future__ import annotations

from pathlib import Path

from ._common import EXIT_OK


def cmd_demo(args) -> int:
    from core.api import write_demo

    path = write_demo(Path(args.directory), force=args.force)
    print(f"demo scenario written to {path}")
    return EXIT_OK


def register(sub) -> None:
    sp = sub.add_parser("demo", help="write the invented demo scenario and its orbit files into DIR")
    sp.add_argument("directory", metavar="DIR",
                    help="folder to write demo_scenario.toml and its orbit files into "
                         "(made if missing; required)")
    sp.add_argument("--force", action="store_true",
                    help="overwrite demo files in DIR that were edited (default: refuse, write nothing)")
    sp.set_defaults(func=cmd_demo)
