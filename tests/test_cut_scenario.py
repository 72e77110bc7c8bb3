"""A scenario cut short that is still valid TOML is visible: the sections that came from
defaults are named in the plan header, the plan JSON and on the sheet.

Seen (issue: numbers a crew can trust, "Options and values"): 31 of 200 random cuts of a
scenario fell back to defaults without a word; one left a GPS-only plan with a 5 deg mask.
"""

from __future__ import annotations

import json
import os

import pytest

from core.files.demo import FILE_NAMES, write_demo
from core.files.scenario import load_scenario
from core.plan.spec import DEFAULTABLE_SECTIONS, Scenario
from planner_gui.cli import main


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    return write_demo(tmp_path_factory.mktemp("demo")).parent


def _cut_before(demo_dir, tmp_path, header: str):
    text = (demo_dir / FILE_NAMES["scenario"]).read_text()
    cut = tmp_path / "cut.toml"
    cut.write_text(text[: text.index(header)])
    for name in os.listdir(demo_dir):
        if name != FILE_NAMES["scenario"]:
            (tmp_path / name).write_bytes((demo_dir / name).read_bytes())
    return cut


@pytest.mark.parametrize("header, missing", [
    ("[receiver]", ["receiver", "search", "signal", "mask"]),
    ("[signal]", ["signal", "mask"]),
    ("elevation_deg", ["mask"]),                   # the header kept, its only key cut
])
def test_cut_file_names_the_defaulted_sections(demo_dir, tmp_path, capsys, header, missing):
    cut = _cut_before(demo_dir, tmp_path, header)
    assert list(load_scenario(cut).defaults_used) == missing
    shown = ", ".join(f"[{s}]" for s in missing)
    assert main(["plan", str(cut)]) == 0
    out = capsys.readouterr().out
    assert out.splitlines()[0].startswith(f"Defaults used for: {shown}")
    assert main(["plan", str(cut), "--format", "json"]) == 0
    assert json.loads(capsys.readouterr().out)["defaults_used"] == missing
    assert main(["plan", str(cut), "--format", "csv"]) == 0
    assert f"warning: defaults used for: {shown}" in capsys.readouterr().err


def test_complete_file_names_none(demo_dir, capsys):
    sc = load_scenario(demo_dir / FILE_NAMES["scenario"])
    assert sc.defaults_used == () and sc.defaults_note == ""
    assert main(["plan", str(demo_dir / FILE_NAMES["scenario"]), "--format", "json"]) == 0
    assert json.loads(capsys.readouterr().out)["defaults_used"] == []


def test_changing_a_section_clears_it_and_keeps_the_others():
    sc = Scenario.from_dict({"site": {"lat_deg": 1, "lon_deg": 2},
                             "time": {"start": "2027-05-18T04:00:00Z", "end": "2027-05-18T05:00:00Z"}})
    assert sc.defaults_used == DEFAULTABLE_SECTIONS
    changed = sc.with_changes(mask={"elevation_deg": 10})
    assert "mask" not in changed.defaults_used and "receiver" in changed.defaults_used
    assert sc.validated().defaults_used == sc.defaults_used
    assert changed == sc.with_changes(mask={"elevation_deg": 10})   # not part of ==


@pytest.mark.gui
def test_sheet_names_the_defaulted_sections(demo_dir, tmp_path, qapp):
    from core.plan.pipeline import make_plan
    from planner_gui import sheets

    plan = make_plan(load_scenario(_cut_before(demo_dir, tmp_path, "[signal]")))
    seen: list = []
    sheets.write_sheet_pdf(plan, tmp_path / "cut.pdf", on_pages=seen.extend)
    text = " ".join(b.text for b in seen[0].boxes)
    assert "Defaults used" in text and "[signal], [mask] (not in the scenario file)" in text
