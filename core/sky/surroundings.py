"""What surrounds the antenna along a drive: horizon profiles and stretches of the route.

* **Horizon profile** (``read_horizon_csv``): an azimuth-dependent elevation mask from a
  CSV ``azimuth_deg, elevation_deg`` (header required, ``#`` comments), linearly
  interpolated in azimuth and wrapping around at 360 deg. It applies to the site or to
  one stretch of the route.
* **Stretch kinds** along the route (from distance to distance):

  - ``open``: open sky (only the elevation mask and any profile);
  - ``trees``: foliage over the road, an extra attenuation in dB on every satellite;
  - ``canyon``: a street between buildings of a height on both sides of a street of a
    width; the mask follows from the geometry across and along the street using the
    route's heading at each time (``canyon_mask_deg``);
  - ``outage``: tunnel, underpass, car park: nothing is received.

``surroundings_at`` evaluates them per (satellite, time) for a drive: the mask in force,
which satellites are blocked, the extra attenuation, and the outage flag per time.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..ground.errors import InputError
from .route import csv_records

STRETCH_KINDS = ("open", "trees", "canyon", "outage")

# Antenna height above the road on a car roof [trade: 1.5 m]; the canyon's walls rise
# (building height - antenna height) above the antenna.
ANTENNA_HEIGHT_M = 1.5


@dataclass(frozen=True)
class HorizonProfile:
    """Elevation mask (deg) against azimuth (deg, 0..360), interpolated with wrap-around."""

    azimuth_deg: np.ndarray
    elevation_deg: np.ndarray
    source: str = ""

    def mask_deg(self, azimuth_deg) -> np.ndarray:
        az = np.asarray(azimuth_deg, dtype=float) % 360.0
        a = self.azimuth_deg
        e = self.elevation_deg
        # Wrap: repeat the last point before 0 and the first after 360.
        xa = np.concatenate(([a[-1] - 360.0], a, [a[0] + 360.0]))
        xe = np.concatenate(([e[-1]], e, [e[0]]))
        return np.interp(az, xa, xe)


def horizon_profile(azimuth_deg, elevation_deg, source: str = "") -> HorizonProfile:
    """A profile from points (any order; azimuths taken modulo 360, none repeated)."""
    az = np.asarray(azimuth_deg, dtype=float) % 360.0
    el = np.asarray(elevation_deg, dtype=float)
    if az.size == 0:
        raise InputError("a horizon profile needs at least one point", file=source or None)
    order = np.argsort(az, kind="stable")
    az, el = az[order], el[order]
    if np.any(np.diff(az) == 0):
        k = int(np.argmax(np.diff(az) == 0))
        raise InputError(f"azimuth {az[k]:g} deg appears twice", file=source or None, field="azimuth_deg")
    return HorizonProfile(az, el, source)


def read_horizon_csv(path: str | Path) -> HorizonProfile:
    p = str(path)
    try:
        text = Path(path).read_text(encoding="utf-8-sig")
    except OSError as exc:
        raise InputError(f"cannot read the horizon profile ({exc.strerror})", file=p) from None
    except UnicodeDecodeError:
        raise InputError("not a text file", file=p) from None
    az, el = [], []
    for n, row in csv_records(text, p, ("azimuth_deg", "elevation_deg"), "horizon profile"):
        vals = {}
        for col, lo, hi in (("azimuth_deg", -360.0, 720.0), ("elevation_deg", -10.0, 90.0)):
            try:
                v = float(row.get(col, ""))
            except ValueError:
                raise InputError(f"'{row.get(col, '')}' is not a number", file=p, line=n, field=col) from None
            if not (math.isfinite(v) and lo <= v <= hi):
                raise InputError(f"{v:g} deg is outside {lo:g}..{hi:g} deg", file=p, line=n, field=col)
            vals[col] = v
        az.append(vals["azimuth_deg"])
        el.append(vals["elevation_deg"])
    if not az:
        raise InputError("the horizon profile holds no points", file=p)
    try:
        return horizon_profile(az, el, p)
    except InputError as exc:
        raise InputError(exc.message, file=p, field=exc.field) from None


def canyon_mask_deg(azimuth_deg, heading_deg, building_height_m: float, street_width_m: float,
                    antenna_height_m: float = ANTENNA_HEIGHT_M) -> np.ndarray:
    """Elevation (deg) below which a satellite at ``azimuth_deg`` is behind the buildings,
    for a vehicle in the middle of a straight street along ``heading_deg`` with walls of
    ``building_height_m`` at ``street_width_m / 2`` on each side.

    A ray at azimuth az leaves the street centre at angle b = az - heading to the street;
    it meets a wall after (w/2) / |sin b| horizontally, where the wall rises h above the
    antenna, so the mask is atan(h |sin b| / (w/2)) [calc]: atan(2h/w) across the street,
    0 along it (the street is taken as long; its open ends are what the along-street view
    sees)."""
    h = max(float(building_height_m) - antenna_height_m, 0.0)
    half = float(street_width_m) / 2.0
    b = np.radians(np.asarray(azimuth_deg, dtype=float) - np.asarray(heading_deg, dtype=float))
    return np.degrees(np.arctan2(h * np.abs(np.sin(b)), half))


@dataclass(frozen=True)
class Stretch:
    """A part of the route from ``from_m`` to ``to_m`` (m along it) of one kind."""

    kind: str
    from_m: float
    to_m: float
    name: str = ""
    extra_loss_db: float = 0.0               # trees (and any kind: an extra attenuation)
    building_height_m: float = 0.0           # canyon
    street_width_m: float = 0.0              # canyon
    horizon: HorizonProfile | None = None    # a profile for this stretch

    def to_dict(self) -> dict:
        d = {"kind": self.kind, "name": self.name, "from_m": round(self.from_m, 1), "to_m": round(self.to_m, 1)}
        if self.extra_loss_db:
            d["extra_loss_db"] = self.extra_loss_db
        if self.kind == "canyon":
            d["building_height_m"] = self.building_height_m
            d["street_width_m"] = self.street_width_m
        if self.horizon is not None:
            d["horizon"] = self.horizon.source
        return d


def check_stretches(stretches: list[Stretch], length_m: float, field_name: str = "stretches") -> None:
    """Refuse stretches past the route's end, empty or reversed, or overlapping."""
    for i, st in enumerate(stretches, 1):
        where = f"{field_name}[{i}]"
        if st.kind not in STRETCH_KINDS:
            raise InputError(f"kind '{st.kind}' is not one of {', '.join(STRETCH_KINDS)}", field=f"{where}.kind")
        if not (0.0 <= st.from_m < st.to_m):
            raise InputError(f"from {st.from_m / 1000:g} km must be before to {st.to_m / 1000:g} km "
                             "and not below 0", field=f"{where}.to")
        if st.to_m > length_m + 1e-6:
            raise InputError(f"to {st.to_m / 1000:.3f} km is past the route's end "
                             f"({length_m / 1000:.3f} km)", field=f"{where}.to")
        if st.kind == "canyon" and not (st.building_height_m > 0 and st.street_width_m > 0):
            raise InputError("a canyon needs building_height_m > 0 and street_width_m > 0",
                             field=f"{where}.building_height_m")
        if st.extra_loss_db < 0 or not math.isfinite(st.extra_loss_db):
            raise InputError(f"extra_loss_db {st.extra_loss_db:g} dB must be 0 or more",
                             field=f"{where}.extra_loss_db")
    order = sorted(range(len(stretches)), key=lambda k: stretches[k].from_m)
    for a, b in zip(order, order[1:]):
        if stretches[b].from_m < stretches[a].to_m - 1e-6:
            raise InputError(f"overlaps stretch {a + 1} ({stretches[a].from_m / 1000:g}-"
                             f"{stretches[a].to_m / 1000:g} km)", field=f"{field_name}[{b + 1}].from")


@dataclass
class SurroundingsAt:
    """The surroundings over a drive: per time (T,) the stretch index (-1 = open sky
    outside any stretch) and the outage flag; per (S, T) the mask (deg) from the profiles
    and the street canyon, whether the satellite is blocked, and the extra attenuation."""

    stretch_index: np.ndarray
    stretch_names: list[str]            # per time: the stretch's name or kind, "open" outside
    outage: np.ndarray
    mask_deg: np.ndarray
    blocked: np.ndarray
    extra_loss_db: np.ndarray
    stretches: list[Stretch] = field(default_factory=list)


def surroundings_at(distance_m: np.ndarray, heading_deg: np.ndarray, azimuth_deg: np.ndarray,
                    elevation_deg: np.ndarray, stretches: list[Stretch],
                    site_horizon: HorizonProfile | None = None) -> SurroundingsAt:
    """Evaluate the surroundings at distances (T,) along the route with headings (T,)
    for satellites at azimuth/elevation (S, T). Between stretches the sky is open (with
    the site's horizon profile, if any, everywhere)."""
    d = np.asarray(distance_m, dtype=float)
    n_s, n_t = azimuth_deg.shape
    idx = np.full(n_t, -1)
    for i, st in enumerate(stretches):
        idx[(d >= st.from_m) & (d < st.to_m)] = i
    mask = np.zeros((n_s, n_t)) if site_horizon is None else site_horizon.mask_deg(azimuth_deg)
    loss = np.zeros((n_s, n_t))
    outage = np.zeros(n_t, bool)
    for i, st in enumerate(stretches):
        cols = idx == i
        if not cols.any():
            continue
        az = azimuth_deg[:, cols]
        m = mask[:, cols]
        if st.horizon is not None:
            m = np.maximum(m, st.horizon.mask_deg(az))
        if st.kind == "canyon":
            m = np.maximum(m, canyon_mask_deg(az, heading_deg[None, cols], st.building_height_m,
                                              st.street_width_m))
        mask[:, cols] = m
        loss[:, cols] = st.extra_loss_db
        if st.kind == "outage":
            outage[cols] = True
    blocked = (elevation_deg < mask) | outage[None, :]
    names = [("open" if k < 0 else (stretches[k].name or stretches[k].kind)) for k in idx]
    return SurroundingsAt(idx, names, outage, mask, blocked, loss, list(stretches))


def outage_spans(stretches: list[Stretch]) -> list[tuple[int, Stretch]]:
    """The outage stretches with their index, in order along the route."""
    return sorted(((i, s) for i, s in enumerate(stretches) if s.kind == "outage"), key=lambda x: x[1].from_m)
