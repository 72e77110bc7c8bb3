"""Bad drive keys that only the route file can show (issue 8, "Bad input"): a waypoint
name not on the route (stretch ends, event places, dwell times), a stretch past the
route's end, overlapping stretches, an event outside the window. Each ends with exit 2
and one line naming the scenario file, the key's line and the field, from the core
(core.plan.events.plan_drive) and from ``acqplan plan``, ``acqplan sheet`` and
``acqplan sweep``.

The expected line comes from the test's own TOML text: the n-th header of the array of
tables (or the table) the key is in, then the first line after it that starts with the
key [calc: TOML 1.0, a key belongs to the header above it]; it is never taken from the
code under test.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest
from conftest import REPO

from core.files.demo import write_demo
from core.files.scenario import load_scenario
from core.ground.errors import InputError
from core.plan.events import plan_drive
from planner_gui.cli import main

# (replaced text, replacement, field, (header, n-th occurrence, start of the key's line)).
CASES = {
    "stretch from: no such waypoint": ('from = "Waldeck"', 'from = "Waldek"', "route.stretch[1].from",
                                       ("[[route.stretch]]", 1, "from =")),
    "stretch to: no such waypoint": ('to = "Forsthaus Lindach"', 'to = "Forsthaus"', "route.stretch[1].to",
                                     ("[[route.stretch]]", 1, "to =")),
    "event at: no such waypoint": ('at = "Altmarkt Kressing"', 'at = "Altmarkt"', "event[3].at",
                                   ("[[event]]", 3, "at =")),
    "dwell: no such waypoint": ('"Altmarkt Kressing" = 120', '"Altmarkt" = 120', "route.dwell_s.Altmarkt",
                                ("[route.dwell_s]", 1, '"Altmarkt" =')),
    "event at: past the route's end": ("at = 12.0", "at = 99.0", "event[2].at", ("[[event]]", 2, "at =")),
    "stretch past the route's end": ('to = "Forsthaus Lindach"', "to = 90.0", "route.stretch[1].to",
                                     ("[[route.stretch]]", 1, "to =")),
    "overlapping stretches": ('to = "Forsthaus Lindach"', "to = 28.0", "route.stretch[2].from",
                              ("[[route.stretch]]", 2, "from =")),
    "event outside the window": ('at = "2027-05-18T05:30:00Z"', 'at = "2027-05-18T07:30:00Z"', "event[5].at",
                                 ("[[event]]", 5, "at =")),
}
WORDS = {"stretch past the route's end": "past the route's end", "event at: past the route's end":
         "past the route's end", "overlapping stretches": "overlaps stretch 1",
         "event outside the window": "outside the window"}


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory) -> Path:
    return write_demo(tmp_path_factory.mktemp("drive_bad")).parent


def _key_line(text: str, header: str, nth: int, key_start: str) -> int:
    lines = text.splitlines()
    seen = 0
    for i, line in enumerate(lines):
        if line.strip() == header:
            seen += 1
            if seen == nth:
                for j in range(i + 1, len(lines)):
                    if lines[j].lstrip().startswith(key_start):
                        return j + 1
    raise AssertionError(f"{key_start} under {header} #{nth} not in the text")


def _bad(demo_dir: Path, name: str) -> tuple[Path, int, str]:
    old, new, field, (header, nth, key) = CASES[name]
    text = (demo_dir / "demo_drive_scenario.toml").read_text(encoding="utf-8")
    assert old in text
    bad = text.replace(old, new, 1)
    p = demo_dir / f"bad_{abs(hash(name)) % 10**8}.toml"
    p.write_text(bad, encoding="utf-8")
    return p, _key_line(bad, header, nth, key), field


def _check_line(line: str, p: Path, n: int, field: str, name: str) -> None:
    assert line.count("\n") == 0
    assert str(p) in line, line
    assert f"line {n}," in line, (n, line)
    assert f"field '{field}'" in line, line
    if name in WORDS:
        assert WORDS[name] in line, line


@pytest.mark.parametrize("name", sorted(CASES))
def test_core_names_file_line_and_field(demo_dir, name):
    p, n, field = _bad(demo_dir, name)
    with pytest.raises(InputError) as exc:
        plan_drive(load_scenario(p), monte_carlo=False)
    err = exc.value
    assert (err.file, err.line, err.field) == (str(p), n, field)
    _check_line(str(err), p, n, field, name)


@pytest.mark.parametrize("name", sorted(CASES))
@pytest.mark.parametrize("command", ["plan", "sheet", "sweep"])
def test_commands_exit_2_with_one_line(demo_dir, tmp_path, capsys, command, name):
    p, n, field = _bad(demo_dir, name)
    extra = {"plan": [], "sheet": ["-o", str(tmp_path / "x.pdf")], "sweep": ["--workers", "1"]}[command]
    code = main([command, str(p), *extra])
    out, err = capsys.readouterr()
    assert code == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith(f"acqplan {command}: ")
    _check_line(lines[0], p, n, field, name)
    assert out == "" and not (tmp_path / "x.pdf").exists()


def test_process_exit_code_and_a_sweep_on_worker_processes(demo_dir):
    # The same through a real process, the sweep on two worker processes (the scenario,
    # with where its keys stand, is pickled to them).
    p, n, field = _bad(demo_dir, "event at: no such waypoint")
    for args in (["plan", str(p)], ["sweep", str(p), "--workers", "2", "--vary", "coherent_ms=4,8"]):
        proc = subprocess.run([sys.executable, "-m", "planner_gui.cli", *args], cwd=REPO,
                              capture_output=True, text=True, timeout=300)
        assert proc.returncode == 2, proc.stderr[-2000:]
        lines = proc.stderr.strip().splitlines()
        assert len(lines) == 1, proc.stderr
        _check_line(lines[0], p, n, field, "event at: no such waypoint")
        assert proc.stdout == ""


def test_checker_lines_of_array_elements(demo_dir):
    # The scenario checker's own problems in [[event]] and [[route.stretch]] elements name
    # that element's line too (before, a key under [[...]] had no line).
    from core.plan.spec import ScenarioValidationError

    text = (demo_dir / "demo_drive_scenario.toml").read_text(encoding="utf-8")
    bad = text.replace('kind = "hot"', 'kind = "lukewarm"', 1).replace("street_width_m = 12", "street_width_m = 1")
    p = demo_dir / "bad_checker.toml"
    p.write_text(bad, encoding="utf-8")
    with pytest.raises(ScenarioValidationError) as exc:
        load_scenario(p)
    got = {q.field: q.line for q in exc.value.problems}
    assert got == {"event[3].kind": _key_line(bad, "[[event]]", 3, "kind ="),
                   "route.stretch[2].street_width_m": _key_line(bad, "[[route.stretch]]", 2, "street_width_m =")}
