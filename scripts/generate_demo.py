#!/usr/bin/env python3
"""Regenerate the invented demo data in sample_almanacs/ (or another folder).

    python scripts/generate_demo.py              # rewrite sample_almanacs/
    python scripts/generate_demo.py OUT_DIR      # write into OUT_DIR instead
    python scripts/generate_demo.py --check      # compare only; exit status 1 if different

All values come from core/files/demo.py (fixed seed, deterministic): the output is
byte-identical on every run.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

from core.files.demo import demo_files, write_demo  # noqa: E402


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Regenerate acqplan's invented demo data.")
    parser.add_argument("out_dir", nargs="?", type=Path, default=REPO / "sample_almanacs",
                        help="folder to write (default: sample_almanacs/ in the repository)")
    parser.add_argument("--check", action="store_true",
                        help="do not write; report files that differ from a fresh generation")
    args = parser.parse_args(argv)

    if args.check:
        differ = []
        for name, text in demo_files().items():
            path = args.out_dir / name
            if not path.is_file() or path.read_bytes() != text.encode("utf-8"):
                differ.append(name)
        for name in differ:
            print(f"differs or missing: {args.out_dir / name}")
        if not differ:
            print(f"all demo files in {args.out_dir} are up to date")
        return 1 if differ else 0

    scenario = write_demo(args.out_dir, force=True)   # regenerating replaces on purpose
    for name in demo_files():
        print(f"wrote {args.out_dir / name}")
    print(f"scenario: {scenario}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
