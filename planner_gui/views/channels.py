"""Channel timeline: one row per receiver channel, the search and track segments the
expected-time simulation gives, each labelled with its satellite, plus the first-fix time
and the Monte Carlo median and 95th-percentile TTFF.

Searches are hatched orange, tracks solid sky blue (planner_gui.style.SEGMENT_COLOURS);
a search abandoned because the satellite set is outlined in vermillion.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QFontMetrics
from PySide6.QtWidgets import QToolButton, QWidget

from ..models import PlanModel
from ..style import OKABE_ITO, SEGMENT_COLOURS
from ._common import (
    UtcAxis,
    ViewFrame,
    brush,
    configure_pyqtgraph,
    cosmetic_pen,
    grid_key,
    small_font,
    utc_text,
)

LABEL_MIN_PX = 30       # a segment label is shown when its stretch is at least this wide


class ChannelView(ViewFrame):
    def __init__(self, model: PlanModel, parent: QWidget | None = None):
        configure_pyqtgraph()
        super().__init__("Channel timeline", parent)
        self.setObjectName("channelView")
        self.model = model
        self.zoom_start = QToolButton(self)
        self.zoom_start.setText("Start of test")
        self.zoom_start.setToolTip("Show the first minutes, up to the 95th-percentile TTFF")
        self.zoom_all = QToolButton(self)
        self.zoom_all.setText("Whole window")
        self.zoom_all.setToolTip("Show the whole test window")
        self.zoom_start.clicked.connect(self.show_start)
        self.zoom_all.clicked.connect(self.show_all)
        self.add_header_widget(self.zoom_start)
        self.add_header_widget(self.zoom_all)
        self.plot = pg.PlotWidget(self, axisItems={"bottom": UtcAxis("bottom")})
        self.plot.setObjectName("channelPlot")
        self.outer.addWidget(self.plot, 1)
        pi = self.plot.getPlotItem()
        pi.setMenuEnabled(False)
        pi.hideButtons()
        pi.showGrid(x=True, y=False, alpha=0.25)
        pi.setLabel("bottom", "time (UTC)")
        pi.setLabel("left", "channel")
        pi.getAxis("left").setStyle(tickLength=0)
        vb = pi.getViewBox()
        vb.invertY(True)
        vb.setMouseEnabled(x=True, y=False)
        self.vb = vb
        self._pi = pi

        self.track_bars = pg.BarGraphItem(x0=[], width=[], y=[], height=0.66,
                                          brush=brush(SEGMENT_COLOURS["track"], 230),
                                          pen=cosmetic_pen("#2B6C8F", 0.8))
        self.search_fill = pg.BarGraphItem(x0=[], width=[], y=[], height=0.66,
                                           brush=brush(SEGMENT_COLOURS["search"], 90),
                                           pen=cosmetic_pen("#00000000", 0))
        self.search_hatch = pg.BarGraphItem(x0=[], width=[], y=[], height=0.66,
                                            brush=brush("#A86F00", 255, Qt.BrushStyle.BDiagPattern),
                                            pen=cosmetic_pen(SEGMENT_COLOURS["search"], 1.0))
        self.abandoned = pg.BarGraphItem(x0=[], width=[], y=[], height=0.74, brush=None,
                                         pen=cosmetic_pen(OKABE_ITO["vermillion"], 2.0))
        self.selected_bars = pg.BarGraphItem(x0=[], width=[], y=[], height=0.86, brush=None,
                                             pen=cosmetic_pen("#000000", 2.4))
        for z, item in enumerate((self.track_bars, self.search_fill, self.search_hatch,
                                  self.abandoned, self.selected_bars)):
            item.setZValue(z)
            pi.addItem(item)
        self.fix_line = pg.InfiniteLine(angle=90, movable=False, pen=cosmetic_pen("#000000", 2.0))
        self.median_line = pg.InfiniteLine(angle=90, movable=False,
                                           pen=cosmetic_pen(OKABE_ITO["blue"], 1.8, Qt.PenStyle.DashLine))
        self.p95_line = pg.InfiniteLine(angle=90, movable=False,
                                        pen=cosmetic_pen(OKABE_ITO["vermillion"], 1.8, Qt.PenStyle.DotLine))
        self.cursor_line = pg.InfiniteLine(angle=90, movable=False,
                                           pen=cosmetic_pen("#444444", 1.2, Qt.PenStyle.DashLine))
        for item in (self.fix_line, self.median_line, self.p95_line, self.cursor_line):
            item.setZValue(10)
            item.hide()
            pi.addItem(item)
        self.info.setText("no plan yet")
        # Marker labels sit in a lane above channel 1, pushed apart so they never overlap.
        self.marker_labels: dict[str, pg.TextItem] = {}
        for key, c in (("fix", "#000000"), ("median", OKABE_ITO["blue"]), ("p95", "#A33A00")):
            t = pg.TextItem("", color=c, anchor=(0.0, 0.5), fill=(255, 255, 255, 225))
            t.setFont(small_font(8, bold=key == "fix"))
            t.setZValue(12)
            pi.addItem(t)
            self.marker_labels[key] = t
        self._marker_x: dict[str, float | None] = {"fix": None, "median": None, "p95": None}
        self._labels: list[pg.TextItem] = []
        self._label_spans: list[tuple[float, float]] = []
        self._font = small_font(7.5)
        self._segments = []
        self._zoomed_grid = None        # (first, last, count) of the grid last zoomed to
        self._grow_labels(48)           # made now, so the first plan does not wait for them
        vb.sigXRangeChanged.connect(self._update_labels)
        vb.sigResized.connect(self._update_labels)
        self.plot.scene().sigMouseClicked.connect(self._clicked)
        model.planChanged.connect(self._on_plan)
        model.ttffChanged.connect(self._on_plan)
        model.cursorChanged.connect(self._on_cursor)
        model.selectionChanged.connect(self._on_selection)

    # -- model -> view
    def _on_plan(self, result) -> None:
        plan = result.plan
        segs = plan.timeline.segments
        self._segments = segs
        n_ch = plan.scenario.receiver.channels

        def bars(items):
            if not items:
                return {"x0": np.array([]), "width": np.array([]), "y": np.array([])}
            return {"x0": np.array([g.start_unix_s for g in items]),
                    "width": np.array([max(g.end_unix_s - g.start_unix_s, 0.0) for g in items]),
                    "y": np.array([float(g.channel) for g in items])}

        tracks = [g for g in segs if g.kind == "track"]
        searches = [g for g in segs if g.kind == "search"]
        lost = [g for g in searches if not g.acquired]
        self.track_bars.setOpts(**bars(tracks))
        self.search_fill.setOpts(**bars(searches))
        self.search_hatch.setOpts(**bars(searches))
        self.abandoned.setOpts(**bars(lost))
        ticks = [(float(c), f"{c}") for c in range(1, n_ch + 1)] + [(-0.05, "TTFF")]
        self._pi.getAxis("left").setTicks([ticks, []])
        self.vb.setLimits(yMin=-0.6, yMax=n_ch + 0.7)
        self.vb.setYRange(-0.4, n_ch + 0.5, padding=0)

        # Labels: one per satellite chain (a search and the track that follows it).
        chains: list[tuple[str, int, float, float]] = []
        for g in segs:
            if (chains and g.kind == "track" and chains[-1][0] == g.sat_id
                    and chains[-1][1] == g.channel):
                sid, ch, a, _b = chains[-1]
                chains[-1] = (sid, ch, a, g.end_unix_s)
            else:
                prev = next((i for i in range(len(chains) - 1, -1, -1)
                             if chains[i][0] == g.sat_id and chains[i][1] == g.channel
                             and abs(chains[i][3] - g.start_unix_s) < 1e-6), None)
                if prev is not None:
                    sid, ch, a, _b = chains[prev]
                    chains[prev] = (sid, ch, a, g.end_unix_s)
                else:
                    chains.append((g.sat_id, g.channel, g.start_unix_s, g.end_unix_s))
        self._grow_labels(len(chains))
        self._label_spans = []
        for i, t in enumerate(self._labels):
            if i < len(chains):
                sid, ch, a, b = chains[i]
                t.setText(sid)
                t.setPos(a, float(ch))
                self._label_spans.append((a, b))
            else:
                t.setText("")
                t.hide()

        t0 = plan.times.unix_s[0]
        ff = plan.timeline.first_fix_unix_s
        stats = plan.ttff
        final = result.final
        marks = {"fix": (self.fix_line, None if ff is None else ff - t0, "first fix {v:.0f} s (mean searches)"),
                 "median": (self.median_line, stats.median_s if final else None, "median {v:.0f} s"),
                 "p95": (self.p95_line, stats.p95_s if final else None, "95 % {v:.0f} s")}
        for key, (line, value, fmt) in marks.items():
            label = self.marker_labels[key]
            if value is not None and math.isfinite(value):
                line.setValue(t0 + value)
                line.show()
                label.setText(fmt.format(t=utc_text(t0 + value), v=value))
                label.show()
                self._marker_x[key] = t0 + value
            else:
                line.hide()
                label.hide()
                self._marker_x[key] = None
        if final:
            med = "n/a" if not math.isfinite(stats.median_s) else f"{stats.median_s:.1f} s"
            p95 = "n/a" if not math.isfinite(stats.p95_s) else f"{stats.p95_s:.1f} s"
            mc = f"TTFF median {med}, 95 % {p95} ({stats.n_runs} Monte Carlo runs"
            mc += f", {stats.n_no_fix} without a fix)" if stats.n_no_fix else ")"
        else:
            mc = "Monte Carlo TTFF: computing…"
        fix = "no first fix in the window · " if ff is None else f"first fix {utc_text(ff)} UTC · "
        self.info.setText(f"hatched: search, solid: track · {fix}{mc}")
        grid = grid_key(plan)
        if not plan.reused_geometry or grid != self._zoomed_grid:
            # a new plan, or the same geometry on another grid (a drive event chosen)
            self._zoomed_grid = grid
            self.show_start()
        else:
            self._update_labels()

    def _grow_labels(self, n: int) -> None:
        while len(self._labels) < n:
            t = pg.TextItem("", color="#111111", anchor=(0.0, 0.5))
            t.setFont(self._font)
            t.setZValue(8)
            t.hide()
            self._pi.addItem(t)
            self._labels.append(t)

    def show_all(self) -> None:
        plan = self.model.plan
        if plan is None:
            return
        t = plan.times.unix_s
        self.vb.setLimits(xMin=float(t[0]) - 60.0, xMax=float(t[-1]) + 60.0)
        self.vb.setXRange(float(t[0]), float(t[-1]), padding=0.01)

    def show_start(self) -> None:
        plan = self.model.plan
        if plan is None:
            return
        t0 = float(plan.times.unix_s[0])
        ends = [plan.ttff.p95_s, plan.timeline.ttff_s or 0.0, 60.0]
        span = max(v for v in ends if v is not None and math.isfinite(v)) * 1.3
        self.vb.setXRange(t0, min(t0 + span, float(plan.times.unix_s[-1])), padding=0.01)

    def _update_labels(self, *_args) -> None:
        px = self.vb.viewPixelSize()[0]
        if not px or not math.isfinite(px):
            return
        for t, (a, b) in zip(self._labels, self._label_spans):
            t.setVisible((b - a) / px >= LABEL_MIN_PX)
        # Marker labels in the lane, in the order of their lines: pushed right so they do
        # not overlap, then pulled back left where the last one would leave the view.
        (x_lo, x_hi), _ = self.vb.viewRange()
        placed = sorted((x, key) for key, x in self._marker_x.items() if x is not None)
        widths = []
        for _x, key in placed:
            item = self.marker_labels[key].textItem
            widths.append((QFontMetrics(item.font()).horizontalAdvance(item.toPlainText()) + 12.0) * px)
        pos = []
        next_free = x_lo
        for (x, _key), w in zip(placed, widths):
            p = max(x + 3.0 * px, next_free)
            pos.append(p)
            next_free = p + w
        limit = x_hi
        for i in range(len(pos) - 1, -1, -1):
            pos[i] = max(min(pos[i], limit - widths[i]), x_lo)
            limit = pos[i]
        for (_x, key), p in zip(placed, pos):
            self.marker_labels[key].setPos(p, -0.05)

    def _on_cursor(self, k: int) -> None:
        plan = self.model.plan
        if plan is not None:
            self.cursor_line.setValue(float(plan.times.unix_s[k]))
            self.cursor_line.show()

    def _on_selection(self, sat_id) -> None:
        mine = [g for g in self._segments if g.sat_id == sat_id] if sat_id else []
        if not mine:
            self.selected_bars.setOpts(x0=np.array([]), width=np.array([]), y=np.array([]))
            return
        self.selected_bars.setOpts(x0=np.array([g.start_unix_s for g in mine]),
                                   width=np.array([g.end_unix_s - g.start_unix_s for g in mine]),
                                   y=np.array([float(g.channel) for g in mine]))

    def resizeEvent(self, ev) -> None:
        super().resizeEvent(ev)
        self._update_labels()

    # -- view -> model
    def _clicked(self, ev) -> None:
        if ev.button() != Qt.MouseButton.LeftButton or not self._segments:
            return
        if not self.vb.sceneBoundingRect().contains(ev.scenePos()):
            return
        p = self.vb.mapSceneToView(ev.scenePos())
        ch = int(round(p.y()))
        hit = self.segment_at(p.x(), ch)
        if hit is not None:
            self.model.select(hit.sat_id)
        elif self.model.plan is not None:          # an empty place: move the plan time there
            self.model.set_cursor(self.model.plan.index_at(p.x()))

    def segment_at(self, t: float, channel: int):
        px = self.vb.viewPixelSize()[0] or 0.0
        best = None
        for g in self._segments:
            if g.channel == channel and g.start_unix_s - 3 * px <= t <= g.end_unix_s + 3 * px:
                best = g
                if g.start_unix_s <= t <= g.end_unix_s:
                    return g
        return best
