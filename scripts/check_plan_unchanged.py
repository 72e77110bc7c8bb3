"""Check that a change left the demo plan's numbers alone: the plan JSON of this tree
against the plan JSON of a git ref (default ``main``), to rounding.

Both plans are computed from the same freshly written demo files (``acqplan demo``), each
with its own code (the ref is exported with ``git archive`` into a temporary folder).
Numbers must be equal, or differ by at most one unit of the last decimal either of them
shows (the JSON rounds every figure). The Monte Carlo percentiles (``ttff_median_s``,
``ttff_p95_s``) are sample statistics; when the simulator's random stream changes they
may move within their sampling error, so they are compared with ``--ttff-tolerance-s``
(default 0: equal to rounding as well).

Run: python scripts/check_plan_unchanged.py [--ref main] [--ttff-tolerance-s S] [--hours H]
Exit 0 when the plans agree, 1 with the first differences listed otherwise.
"""

from __future__ import annotations

import argparse
import io
import json
import subprocess
import sys
import tarfile
import tempfile
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
MC_KEYS = {"ttff_median_s", "ttff_p95_s"}


def _unit(x: float) -> float:
    text = repr(float(x))
    if "e" in text or "." not in text:
        return 0.0
    return 10.0 ** -len(text.split(".")[1])


def compare(a, b, path: str, out: list[str], ttff_tol: float) -> None:
    if isinstance(a, dict) and isinstance(b, dict):
        if a.keys() != b.keys():
            out.append(f"{path}: keys differ: {sorted(set(a) ^ set(b))}")
        for k in a.keys() & b.keys():
            compare(a[k], b[k], f"{path}.{k}", out, ttff_tol)
    elif isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            out.append(f"{path}: {len(a)} items against {len(b)}")
        for i, (x, y) in enumerate(zip(a, b)):
            compare(x, y, f"{path}[{i}]", out, ttff_tol)
    elif isinstance(a, float | int) and isinstance(b, float | int) and not isinstance(a, bool):
        key = path.rsplit(".", 1)[-1]
        tol = max(_unit(a), _unit(b)) * 1.0000001
        if key in MC_KEYS:
            tol = max(tol, ttff_tol)
        if abs(a - b) > tol:
            out.append(f"{path}: {a} against {b}")
    elif a != b:
        out.append(f"{path}: {a!r} against {b!r}")


def plan_json(tree: Path, demo_dir: Path, hours: float | None) -> dict:
    scenario = demo_dir / "demo_scenario.toml"
    if hours is not None:
        text = scenario.read_text()
        text = text.replace('end = "2027-05-18T06:00:00Z"',
                            f'end = "2027-05-18T{4 + int(hours):02d}:00:00Z"' if hours < 20 else
                            'end = "2027-05-19T04:00:00Z"')
        scenario = demo_dir / "long.toml"
        scenario.write_text(text)
    out = subprocess.run([sys.executable, "-m", "planner_gui.cli", "plan", str(scenario),
                          "--format", "json"], cwd=tree, capture_output=True, text=True)
    if out.returncode != 0:
        raise SystemExit(f"plan failed in {tree}: {out.stderr.strip()}")
    return json.loads(out.stdout)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--ref", default="main")
    ap.add_argument("--ttff-tolerance-s", type=float, default=0.0)
    ap.add_argument("--hours", type=float, default=None,
                    help="window length from 04:00 (default: the demo's 2 h; 24 for a day)")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        archive = subprocess.run(["git", "archive", args.ref], cwd=REPO, capture_output=True,
                                 check=True).stdout
        ref_tree = tmp / "ref"
        ref_tree.mkdir()
        with tarfile.open(fileobj=io.BytesIO(archive)) as tar:
            tar.extractall(ref_tree, filter="data")
        demo = tmp / "demo"
        subprocess.run([sys.executable, "-m", "planner_gui.cli", "demo", str(demo)], cwd=REPO,
                       capture_output=True, check=True)
        mine = plan_json(REPO, demo, args.hours)
        theirs = plan_json(ref_tree, demo, args.hours)
    diffs: list[str] = []
    compare(theirs, mine, "plan", diffs, args.ttff_tolerance_s)
    if diffs:
        print(f"{len(diffs)} differences against {args.ref}:")
        for d in diffs[:40]:
            print("  " + d)
        return 1
    print(f"the demo plan equals {args.ref}'s to rounding "
          f"({len(mine['satellites'])} satellites, ttff {mine['ttff_s']} s, "
          f"median {mine['ttff_median_s']} s against {theirs['ttff_median_s']} s)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
