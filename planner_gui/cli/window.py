"""``acqplan gui`` and ``acqplan sheet``: the commands that need Qt (imported only when run)."""

from __future__ import annotations


def cmd_gui(args) -> int:
    from planner_gui.app import run_gui

    return run_gui(args)


def cmd_sheet(args) -> int:
    from planner_gui.sheets import run_sheet_command

    return run_sheet_command(args)


def register(sub) -> None:
    sp = sub.add_parser("gui", help="open the planner window (or render it to PNG files)")
    sp.add_argument("scenario", nargs="?", metavar="SCENARIO.toml",
                    help="scenario file to open (default: an empty scenario)")
    sp.add_argument("--demo", action="store_true", help="open the bundled demo scenario")
    sp.add_argument("--screenshot", metavar="DIR",
                    help="render the window and each view to PNG files in DIR, then exit "
                         "(default: open the window)")
    sp.add_argument("--size", default="1600x1000", metavar="WxH",
                    help="window size for --screenshot, in pixels (default: 1600x1000)")
    sp.set_defaults(func=cmd_gui)

    sp = sub.add_parser("sheet", help="print the search-plan sheets to PDF")
    sp.add_argument("scenario", nargs="?", metavar="SCENARIO.toml",
                    help="scenario file to plan (or give --demo)")
    sp.add_argument("--demo", action="store_true", help="use the bundled demo scenario")
    sp.add_argument("-o", "--output", required=True, metavar="FILE.pdf",
                    help="PDF file to write (required; written atomically)")
    sp.add_argument("--paper", choices=("a4", "letter"), default="a4",
                    help="paper size, portrait (default: a4)")
    sp.add_argument("--png", metavar="DIR",
                    help="also write every page as page-N-PAPER.png at 80 dpi into DIR "
                         "(default: no images)")
    sp.set_defaults(func=cmd_sheet)
