"""Catalogue of the signals acqplan plans searches for.

Values from the signal ICDs [pub: IS-GPS-200, IS-GPS-705, Galileo OS SIS ICD,
BeiDou ICD B1I and B1C, GLONASS ICD 5.1, IS-QZSS-PNT], as tabulated in
``../shared/domain-notes.md`` section 3.
"""

from __future__ import annotations

from dataclasses import dataclass

from .constants import SPEED_OF_LIGHT_M_S
from .errors import InputError


@dataclass(frozen=True)
class Signal:
    """One GNSS signal: carrier (FDMA step), code and data-symbol timing."""

    signal_id: str               # GPS-L1CA, GAL-E1, ...
    system: str                  # RINEX system letter this signal belongs to
    description: str
    carrier_hz: float            # for GLONASS FDMA: the k = 0 carrier
    chip_rate_hz: float
    code_length_chips: int
    code_period_s: float
    symbol_period_s: float       # data bit / secondary-code chip period: the longest
                                 # coherent interval free of a possible sign change
    symbol_note: str
    fdma_step_hz: float = 0.0    # GLONASS: carrier = carrier_hz + k * fdma_step_hz

    def carrier_for(self, glonass_k: int | None = None) -> float:
        """Carrier frequency in Hz; for GLONASS L1OF the channel k sets it."""
        if self.fdma_step_hz:
            return self.carrier_hz + (glonass_k or 0) * self.fdma_step_hz
        return self.carrier_hz

    def wavelength_m(self, glonass_k: int | None = None) -> float:
        return SPEED_OF_LIGHT_M_S / self.carrier_for(glonass_k)

    @property
    def chip_length_m(self) -> float:
        return SPEED_OF_LIGHT_M_S / self.chip_rate_hz


SIGNALS: dict[str, Signal] = {s.signal_id: s for s in (
    Signal("GPS-L1CA", "G", "GPS L1 C/A", 1575.42e6, 1.023e6, 1023, 1e-3, 20e-3,
           "50 bps navigation data, 20 ms bits"),
    Signal("GPS-L5", "G", "GPS L5 (I5/Q5)", 1176.45e6, 10.23e6, 10230, 1e-3, 1e-3,
           "NH10 / NH20 secondary code, 1 ms chips"),
    Signal("GAL-E1", "E", "Galileo E1 OS (B/C)", 1575.42e6, 1.023e6, 4092, 4e-3, 4e-3,
           "250 sps data (E1-B) / 25-chip secondary code of 4 ms chips (E1-C)"),
    Signal("GAL-E5A", "E", "Galileo E5a", 1176.45e6, 10.23e6, 10230, 1e-3, 1e-3,
           "20-chip (I) / 100-chip (Q) secondary code, 1 ms chips"),
    Signal("BDS-B1I", "C", "BeiDou B1I", 1561.098e6, 2.046e6, 2046, 1e-3, 1e-3,
           "MEO/IGSO: NH20 secondary code of 1 ms chips + 50 bps; GEO: 500 bps"),
    Signal("BDS-B1C", "C", "BeiDou B1C", 1575.42e6, 1.023e6, 10230, 10e-3, 10e-3,
           "100 sps data / 1800-chip pilot secondary code of 10 ms chips"),
    Signal("GLO-L1OF", "R", "GLONASS L1OF (FDMA)", 1602.0e6, 0.511e6, 511, 1e-3, 10e-3,
           "50 bps with 10 ms meander", fdma_step_hz=0.5625e6),
    Signal("QZS-L1CA", "J", "QZSS L1 C/A", 1575.42e6, 1.023e6, 1023, 1e-3, 20e-3,
           "50 bps navigation data, 20 ms bits"),
)}

# The signal used when a satellite's system is asked for without a signal.
DEFAULT_SIGNAL_FOR_SYSTEM: dict[str, str] = {
    "G": "GPS-L1CA", "E": "GAL-E1", "C": "BDS-B1I", "R": "GLO-L1OF", "J": "QZS-L1CA",
}


def get_signal(signal_id: str) -> Signal:
    try:
        return SIGNALS[signal_id.strip().upper()]
    except KeyError:
        raise InputError(f"unknown signal '{signal_id}'; known: {', '.join(SIGNALS)}",
                         field="signal") from None
