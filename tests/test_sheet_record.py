"""The result page of the sheets: a record held against the plan, printed as PDF.

The comparison is core.records.compare_record on the demo plan and a synthetic record
(tests/test_records_compare.py) with an oscillator beyond the planned range, so every
satellite left its window; the page must print each compared satellite with "NO", the
oscillator and the C/N0 fit as compare_record found them [calc]. Text is read back with
pypdf.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import numpy as np
import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
pypdf = pytest.importorskip("pypdf")
pytest.importorskip("pytestqt")
sys.path.insert(0, str(Path(__file__).resolve().parent))

from test_records_compare import write_rinex3  # noqa: E402

from core.api import compare_record, load_record, load_scenario, make_plan  # noqa: E402
from core.files.demo import write_demo  # noqa: E402


def test_record_page_in_the_sheets(qapp, tmp_path):
    """``qapp``: pytest-qt's QApplication (a bare QGuiApplication made here would make
    later window tests crash)."""
    from planner_gui.sheets import write_sheet_pdf

    plan = make_plan(load_scenario(write_demo(tmp_path)))
    without = write_sheet_pdf(plan, tmp_path / "plain.pdf", generated_unix_s=0.0)
    times = plan.times.start_unix_s + 5.0 * np.arange(13)
    write_rinex3(tmp_path / "drive.23o", plan, times, osc_ppb=-2000.0)
    comparison = compare_record(plan, load_record(tmp_path / "drive.23o"))
    plan.record_comparison = comparison
    pdf = tmp_path / "with_record.pdf"
    with_record = write_sheet_pdf(plan, pdf, generated_unix_s=0.0)
    assert with_record >= without + 1
    reader = pypdf.PdfReader(str(pdf))
    text = " ".join(" ".join(p.extract_text() for p in reader.pages[without:]).split())
    assert "Record against the plan" in text
    assert f"{comparison.oscillator_offset_ppb:+.1f} ppb" in text
    assert "OUTSIDE" in text
    assert f"zenith {comparison.cn0_fit.zenith_dbhz:.1f}, mask {comparison.cn0_fit.mask_dbhz:.1f}" in text
    for s in comparison.satellites:
        assert s.sat_id in text
    assert text.count("NO (") == len(comparison.outside()) > 0
    out = os.environ.get("ACQPLAN_SCREENSHOT_DIR")
    if out:
        import shutil

        shutil.copy(pdf, Path(out) / "with_record.pdf")
