"""Every option of every command says what it does and what happens without it; the
tables on screen stay readable and the plan CSV carries numbers and full ISO times.

References: argparse's own parser objects (the options as registered); ISO 8601 times
parsed with datetime.fromisoformat; fractions parsed with float() [calc].
"""

from __future__ import annotations

import argparse
import csv
import io
from datetime import datetime

import pytest

from core.files.demo import write_demo
from planner_gui.cli import build_parser, main


def _options():
    parser = build_parser()
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                for act in sub._actions:
                    if not isinstance(act, argparse._HelpAction):
                        yield name, act


def test_every_option_has_help_that_says_its_default():
    seen = 0
    for command, act in _options():
        flag = "/".join(act.option_strings) or act.dest
        text = (act.help or "").lower()
        assert text.strip(), f"{command} {flag}: no help text"
        takes_value = act.nargs != 0
        if act.option_strings and takes_value and not act.required:
            assert "default" in text, f"{command} {flag}: help does not say the default"
        seen += 1
    assert seen > 30


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return write_demo(tmp_path_factory.mktemp("cli_help"))


def test_tables_are_not_padded_and_csv_has_numbers_and_dates(demo, capsys):
    assert main(["plan", str(demo)]) == 0
    out = capsys.readouterr().out
    assert max(len(line) for line in out.splitlines()) <= 190
    assert not any(line.endswith(" ") for line in out.splitlines())
    assert main(["bins", "--coherent-ms", "1", "--max-loss-db", "1", "--span-hz", "-5000,5000"]) == 0
    out = capsys.readouterr().out
    assert max(len(line) for line in out.splitlines()) <= 80
    assert main(["plan", str(demo), "--format", "csv"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert rows
    for r in rows:
        assert 0.0 < float(r["in_view"]) <= 1.0 and "%" not in r["in_view"]
        if r["search_start"]:
            t = datetime.fromisoformat(r["search_start"].replace("Z", "+00:00"))
            assert t.year == 2027 and t.tzinfo is not None
        if r["acquired"]:
            assert r["acquired"].startswith("2027-05-18T") and r["acquired"].endswith("Z")
