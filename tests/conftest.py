"""Shared test configuration: repository on sys.path and the real orbit-data folder."""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

# Real public orbit files, read in place (never copied into the repository).
ORBIT_DATA = Path(os.environ.get("ACQPLAN_ORBIT_DATA", REPO.parent / "shared" / "orbit-data"))
HAVE_ORBIT_DATA = (ORBIT_DATA / "README.md").is_file()

requires_orbit_data = pytest.mark.skipif(
    not HAVE_ORBIT_DATA,
    reason=f"real orbit files not found at {ORBIT_DATA} (the shared/orbit-data folder beside the repo)",
)


@pytest.fixture(scope="session")
def orbit_data() -> Path:
    if not HAVE_ORBIT_DATA:
        pytest.skip(f"real orbit files not found at {ORBIT_DATA}")
    return ORBIT_DATA
