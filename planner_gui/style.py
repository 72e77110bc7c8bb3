"""Shared look of the window and the sheets: constellation colours and marker shapes.

Colours are the Okabe-Ito colour-blind-safe set [pub: Okabe & Ito, "Color Universal
Design", 2008; also Wong, "Points of view: Color blindness", Nature Methods 8, 441,
2011]. Every constellation also has its own marker shape, so the two cues never rely
on colour alone.
"""

from __future__ import annotations

from dataclasses import dataclass

# Okabe-Ito: (name, hex)
OKABE_ITO = {
    "orange": "#E69F00",
    "sky_blue": "#56B4E9",
    "bluish_green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish_purple": "#CC79A7",
    "black": "#000000",
}


@dataclass(frozen=True)
class SystemStyle:
    system: str          # RINEX letter
    label: str
    colour: str          # hex
    marker: str          # pyqtgraph symbol code: o s t d + x star h p
    marker_name: str     # words, for legends and sheets
    line: str = "solid"  # line pattern of its curves: solid, dash, dot, dashdot (a cue
                         # besides colour: Galileo and GLONASS are close for deuteranopes)


SYSTEM_STYLES: dict[str, SystemStyle] = {
    "G": SystemStyle("G", "GPS", OKABE_ITO["blue"], "o", "circle"),
    "E": SystemStyle("E", "Galileo", OKABE_ITO["orange"], "s", "square", "dash"),
    "C": SystemStyle("C", "BeiDou", OKABE_ITO["bluish_green"], "t", "triangle", "dot"),
    "R": SystemStyle("R", "GLONASS", OKABE_ITO["vermillion"], "d", "diamond", "dashdot"),
    "J": SystemStyle("J", "QZSS", OKABE_ITO["reddish_purple"], "star", "star", "dash"),
    "S": SystemStyle("S", "SBAS", OKABE_ITO["sky_blue"], "x", "cross", "dot"),
    "X": SystemStyle("X", "other", "#666666", "+", "plus"),
}


# Text glyphs of the marker shapes and line patterns, for one-line legends.
MARKER_GLYPHS = {"o": "●", "s": "■", "t": "▼", "d": "◆", "star": "★", "x": "✕", "+": "✚",
                 "h": "⬢", "p": "⬟"}
LINE_GLYPHS = {"solid": "───", "dash": "─ ─", "dot": "┈┈┈", "dashdot": "─·─"}


def style_for(system: str) -> SystemStyle:
    return SYSTEM_STYLES.get(system, SYSTEM_STYLES["X"])


# Timeline segment colours (kind -> hex): search in orange, track in blue, drawn with
# different fill patterns in print as well.
SEGMENT_COLOURS = {"search": OKABE_ITO["orange"], "track": OKABE_ITO["sky_blue"]}

SAFETY_CAUTIONS = (
    "Do not read the sheets or operate the laptop while driving: a second person does, "
    "or stop the vehicle first. Obey traffic law at all times.",
    "Transmitting in GNSS bands (signal generators, re-radiators, repeaters) is regulated: "
    "use only shielded or authorised set-ups. Local rules and licensed practice take "
    "precedence over anything in this plan.",
)

SIGN_CONVENTIONS = (
    "Doppler is positive while the satellite approaches (range decreasing): "
    "Doppler = -range rate / wavelength.",
    "Oscillator offset is positive when the receiver's reference runs fast; a fast "
    "reference lowers every apparent Doppler by offset x carrier.",
)
