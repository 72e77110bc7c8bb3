"""Drive diagram: where the vehicle is along the route at each time, the surroundings it
drives through, and the test events planned on the way.

The diagram is a distance-time strip: time (UTC) across, distance along the route (km)
up. The vehicle's timetable is the dark line; each stretch of the route with its own
surroundings is a horizontal band over its distances, told apart by fill pattern as well
as colour (trees: diagonal lines, street canyon: a grid, outage: dense dots and dark), so
the strip reads in grayscale too. Events are square markers labelled with their id and
kind; a click on one (or the chooser in the header) shows that event's own plan in every
other view, "Whole window" goes back to the plan of the window start. The plan-time
cursor is the vertical line, and a ring marks where the vehicle is then.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QComboBox, QLabel, QWidget

from ..models import PlanModel
from ._common import (
    UtcAxis,
    ViewFrame,
    brush,
    configure_pyqtgraph,
    cosmetic_pen,
    small_font,
    utc_text,
)

# Surroundings kinds -> (fill colour, Qt fill pattern, words of the legend). Colours from
# the Okabe-Ito set, dark enough to print; the pattern is the second cue.
STRETCH_LOOK = {
    "trees": ("#009E73", Qt.BrushStyle.BDiagPattern, "trees"),
    "canyon": ("#8C5A00", Qt.BrushStyle.CrossPattern, "street canyon"),
    "outage": ("#333333", Qt.BrushStyle.Dense4Pattern, "outage (nothing received)"),
    "open": ("#FFFFFF", Qt.BrushStyle.NoBrush, "open sky"),
}
EVENT_WORDS = {"cold": "cold start", "warm": "warm start", "hot": "hot start",
               "reacquire": "re-acquisition"}
WHOLE_WINDOW = "Whole window (plan from the start)"


def event_label(ev) -> str:
    """'E2 warm start 04:12:28' for an EventPlan."""
    return f"{ev.event.id} {EVENT_WORDS.get(ev.event.kind, ev.event.kind)} {utc_text(ev.event.unix_s)}"


class RouteView(ViewFrame):
    def __init__(self, model: PlanModel, parent: QWidget | None = None):
        configure_pyqtgraph()
        super().__init__("Drive", parent)
        self.setObjectName("routeView")
        self.model = model
        self.chooser = QComboBox(self)
        self.chooser.setObjectName("eventChooser")
        self.chooser.setToolTip("The plan every view shows: the whole window, or one test event's own plan")
        self.chooser.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
        self.chooser.activated.connect(self._chosen)
        self.add_header_widget(self.chooser)
        # A drive key the plan could not use (a waypoint name not on the route, a stretch
        # past its end, an event outside the window): the field, its line and the reason,
        # marked above the diagram, which keeps the last drive that could be planned.
        self.problem = QLabel("", self)
        self.problem.setObjectName("routeProblem")
        self.problem.setWordWrap(True)
        self.problem.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.problem.setStyleSheet("background: #FBE3D6; border: 1px solid #C9A38F; padding: 2px 4px;")
        self.problem.hide()
        self.outer.addWidget(self.problem)
        self.plot = pg.PlotWidget(self, axisItems={"bottom": UtcAxis("bottom")})
        self.plot.setObjectName("routePlot")
        self.outer.addWidget(self.plot, 1)
        pi = self.plot.getPlotItem()
        pi.setMenuEnabled(False)
        pi.hideButtons()
        pi.showGrid(x=True, y=True, alpha=0.2)
        pi.setLabel("bottom", "time (UTC)")
        pi.setLabel("left", "distance along the route (km)")
        self.legend = pi.addLegend(offset=(8, 8), labelTextSize="9pt", brush=brush("#FFFFFF", 230),
                                   pen=cosmetic_pen("#777777", 1.0))
        self._bands: list[pg.GraphicsObject] = []
        self._labels: list[pg.TextItem] = []
        self.track = pg.PlotDataItem([], [], pen=cosmetic_pen("#000000", 2.0))
        self.track.setZValue(5)
        pi.addItem(self.track)
        self.events = pg.ScatterPlotItem(size=13, symbol="s", pen=cosmetic_pen("#000000", 1.5),
                                         brush=brush("#E69F00"), hoverable=True)
        self.events.setZValue(8)
        self.events.sigClicked.connect(self._clicked)
        pi.addItem(self.events)
        self.chosen_marker = pg.ScatterPlotItem(size=21, symbol="s", pen=cosmetic_pen("#D55E00", 3.0),
                                                brush=pg.mkBrush(None))
        self.chosen_marker.setZValue(9)
        pi.addItem(self.chosen_marker)
        self.cursor_line = pg.InfiniteLine(angle=90, movable=False, pen=cosmetic_pen("#0072B2", 1.5))
        pi.addItem(self.cursor_line)
        self.vehicle = pg.ScatterPlotItem(size=14, symbol="o", pen=cosmetic_pen("#0072B2", 2.5),
                                          brush=pg.mkBrush(None))
        self.vehicle.setZValue(10)
        pi.addItem(self.vehicle)
        self._drive = None
        model.planChanged.connect(self._on_plan)
        model.driveChanged.connect(self._on_drive)
        model.cursorChanged.connect(self._on_cursor)
        self._on_drive(model.drive)

    # -- problems
    def mark_problem(self, err) -> None:
        """Mark the drive key of an InputError (``route...`` or ``event[n]...``) above the
        diagram; ``None`` clears the mark."""
        field = getattr(err, "field", None) or ""
        if err is None or not (field.startswith("route") or field.startswith("event")):
            self.problem.clear()
            self.problem.hide()
            return
        where = ", ".join(x for x in (f"line {err.line}" if err.line is not None else "", field) if x)
        self.problem.setText(f"Not planned: {where}: {err.message} (the diagram shows the last drive "
                             "that could be planned)")
        self.problem.setToolTip(str(err))
        self.problem.show()

    def problem_text(self) -> str:
        """The marked problem ('' when none), for tests."""
        return self.problem.text() if not self.problem.isHidden() else ""

    # -- model -> view
    def _on_drive(self, drive) -> None:
        self._drive = drive
        pi = self.plot.getPlotItem()
        for item in self._bands + self._labels:
            pi.removeItem(item)
        self._bands, self._labels = [], []
        self.legend.clear()
        self.chooser.blockSignals(True)
        self.chooser.clear()
        self.chooser.addItem(WHOLE_WINDOW, None)
        if drive is None or drive.samples is None:
            self.track.setData([], [])
            self.events.setData([])
            self.info.setText("no route in this scenario: add a [route] section to plan a drive")
            self.chooser.blockSignals(False)
            return
        st = drive.samples.states
        t, d_km = st.unix_s, st.distance_m / 1000.0
        t0, t1 = float(t[0]), float(t[-1])
        seen = set()
        for s in drive.drive.stretches:
            colour, pattern, words = STRETCH_LOOK.get(s.kind, STRETCH_LOOK["open"])
            if s.kind == "open":
                continue
            y0, y1 = s.from_m / 1000.0, s.to_m / 1000.0
            band = pg.LinearRegionItem(values=(y0, y1), orientation="horizontal", movable=False,
                                       brush=brush(colour, 150, pattern),
                                       pen=cosmetic_pen(colour, 1.0))
            band.setZValue(1)
            pi.addItem(band)
            self._bands.append(band)
            # names at the right-hand end, where the timetable has passed every stretch
            label = pg.TextItem(s.name or words, color="#000000", anchor=(1, 0.5))
            label.setFont(small_font(9))
            label.setPos(t1, 0.5 * (y0 + y1))
            label.setZValue(6)
            pi.addItem(label)
            self._labels.append(label)
            if s.kind not in seen:
                seen.add(s.kind)
                sample = pg.BarGraphItem(x=[0], height=[0], width=0, brush=brush(colour, 150, pattern),
                                         pen=cosmetic_pen(colour, 1.0))
                self.legend.addItem(sample, words)
        self.legend.addItem(self.track, "vehicle timetable")
        self.track.setData(t, d_km)
        spots = []
        for ev in drive.events:
            y = ev.distance_m / 1000.0
            spots.append({"pos": (ev.event.unix_s, y), "data": ev.event.id})
            text = pg.TextItem(f"{ev.event.id} {EVENT_WORDS.get(ev.event.kind, ev.event.kind)}",
                               color="#000000", anchor=(-0.15, 1.1))
            text.setFont(small_font(9, bold=True))
            text.setPos(ev.event.unix_s, y)
            text.setZValue(9)
            pi.addItem(text)
            self._labels.append(text)
            self.chooser.addItem(event_label(ev), ev.event.id)
        self.events.setData(spots)
        worst = drive.worst
        length_km = drive.drive.route.length_m / 1000.0
        self.info.setText(f"{length_km:.1f} km, {len(drive.events)} events"
                          + (f", longest to fix: {worst.event.id}" if worst is not None else "")
                          + " · click an event to show its plan")
        pi.setXRange(t0, t1, padding=0.02)
        top = max(length_km, float(np.nanmax(d_km)) if d_km.size else 1.0)
        pi.setYRange(0.0, 1.12 * top, padding=0.02)       # room for the event labels
        self.chooser.blockSignals(False)
        self._show_chosen()

    def _on_plan(self, _result) -> None:
        self._show_chosen()
        self._on_cursor(self.model.cursor)

    def _show_chosen(self) -> None:
        eid = self.model.event_id
        i = self.chooser.findData(eid)
        self.chooser.blockSignals(True)
        self.chooser.setCurrentIndex(max(i, 0))
        self.chooser.blockSignals(False)
        ev = self._event(eid)
        if ev is None:
            self.chosen_marker.setData([])
        else:
            self.chosen_marker.setData([{"pos": (ev.event.unix_s, ev.distance_m / 1000.0)}])

    def _on_cursor(self, _k: int) -> None:
        t = self.model.cursor_unix_s
        drive = self._drive
        if t is None or drive is None or drive.samples is None:
            self.vehicle.setData([])
            return
        st = drive.samples.states
        self.cursor_line.setValue(t)
        d = float(np.interp(t, st.unix_s, st.distance_m)) / 1000.0
        self.vehicle.setData([{"pos": (t, d)}])

    # -- view -> model
    def _event(self, eid):
        if self._drive is None or eid is None:
            return None
        return next((e for e in self._drive.events if e.event.id == eid), None)

    def _clicked(self, _item, points, *args) -> None:
        if len(points):
            self.model.show_event(points[0].data())

    def _chosen(self, index: int) -> None:
        self.model.show_event(self.chooser.itemData(index))

    def vehicle_position(self) -> tuple[float, float] | None:
        """(time, km) of the vehicle marker (for tests)."""
        pts = self.vehicle.points()
        if not len(pts):
            return None
        p = pts[0].pos()
        return float(p.x()), float(p.y())

