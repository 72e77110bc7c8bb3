"""How old the orbit data is against the planned time, and when that is too old.

Every command that plans from orbit files (``plan``, ``passes``, ``doppler``, the window)
calls :func:`check_data_age` after reading them, so all give the same age lines:

* Data whose epoch is more than ``MAX_DATA_AGE_DAYS`` (120 days) before the planned start,
  or more than ``ALMANAC_LEAD_DAYS`` (14 days) after it, is refused: InputError naming the
  file, its epoch and its real age in days, unless the user asked for it
  (``allow_old=True``: ``--allow-old-data``, scenario ``orbits.allow_old_data = true``);
  then it is a warning.
* Data older than the ages the default orbit margin was fitted on (31.6 days almanac,
  9.5 days TLE; docs/orbit-margin.md) gives a warning with the same age.

The limits and their sources are in :mod:`core.ground.constants`.
"""

from __future__ import annotations

from ..ground.constants import ALMANAC_LEAD_DAYS, MAX_DATA_AGE_DAYS, SECONDS_PER_DAY
from ..ground.errors import InputError
from ..ground.timeutil import iso_z
from .orbit_margin import DEFAULT_MARGINS
from .orbit_set import OrbitFileInfo, OrbitSet

_ALLOW = "--allow-old-data (scenario: orbits.allow_old_data = true)"


def _kind_of(orbits: OrbitSet, f: OrbitFileInfo) -> str:
    kinds = {e.info.source_kind for e in orbits.entries if e.info.source_file == f.path}
    return kinds.pop() if len(kinds) == 1 else "almanac"


def describe_age(age_s: float) -> str:
    """'12.3 days before the start' / '2.0 days after the start' (age = start - epoch)."""
    days = abs(age_s) / SECONDS_PER_DAY
    return f"{days:.1f} days {'before' if age_s >= 0 else 'after'} the start"


def check_data_age(orbits: OrbitSet, reference_unix_s: float, *,
                   allow_old: bool = False) -> list[str]:
    """Warnings about the age of each orbit file against ``reference_unix_s`` (the planned
    start); raises InputError for a file too old or too far ahead unless ``allow_old``."""
    warnings: list[str] = []
    for f in orbits.files:
        age_s = reference_unix_s - f.epoch_unix_s
        age_d = age_s / SECONDS_PER_DAY
        when = f"orbit data from {iso_z(f.epoch_unix_s)[:10]} ({describe_age(age_s)})"
        if age_d > MAX_DATA_AGE_DAYS or age_d < -ALMANAC_LEAD_DAYS:
            limit = (f"data more than {MAX_DATA_AGE_DAYS:g} days old" if age_d > 0
                     else f"data more than {ALMANAC_LEAD_DAYS:g} days ahead of its epoch")
            if not allow_old:
                raise InputError(f"{when}: {limit} is refused; use data nearer the planned "
                                 f"start, or {_ALLOW} to plan with it anyway", file=f.path)
            warnings.append(f"{f.path}: {when}: {limit}, used because it was asked for; "
                            "the orbit margins are extrapolated far beyond their fit")
            continue
        model = DEFAULT_MARGINS.get(_kind_of(orbits, f))
        if model is not None and abs(age_d) > model.fitted_max_age_days:
            warnings.append(f"{f.path}: {when}: further from the start than the "
                            f"{model.fitted_max_age_days:g} days the default orbit margin was "
                            "fitted on (docs/orbit-margin.md); windows may be too narrow")
    return warnings
