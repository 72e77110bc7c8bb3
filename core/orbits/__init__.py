"""Orbit data in, satellite states out: the common orbit form, the file readers, the
almanac, broadcast-ephemeris and SGP4 models, and the orbit-data margin."""
