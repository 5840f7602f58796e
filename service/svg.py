"""Hand-written SVG line and scatter plots for the HTML report.

No plotting library is needed: a plot is a handful of ``<path>`` and ``<text>``
elements. The style is built to survive a grey-scale printer: every series
differs from its neighbours by dash pattern *and* marker shape, not only by
colour, and confidence bands are a light neutral fill drawn under the lines.

Each series is drawn as exactly one element with class ``series`` (a line, or
for a points-only series its markers), so a test or a script can count the
series of a rendered plot with ``svg path.series``. Non-finite values are
skipped (a line is broken at them); they never reach the SVG text.

Public entry points: :class:`Series`, :class:`Band`, :func:`plot`,
:func:`nice_ticks`, :func:`log_ticks`.
"""

from __future__ import annotations

import html
import math
from collections.abc import Sequence
from dataclasses import dataclass

__all__ = [
    "Series",
    "Band",
    "Axis",
    "plot",
    "nice_ticks",
    "log_ticks",
    "STYLE_COUNT",
    "SERIES_KINDS",
]

#: how a series is drawn
SERIES_KINDS = ("line", "points", "line+points")

# Ink colours chosen to differ in lightness as well as hue (readable in grey).
_INKS = ("#14213d", "#9c4221", "#1f6f5c", "#6b4c9a", "#8a7014", "#4a4a4a", "#b0306a")
# Dash patterns (stroke-dasharray); "" is solid.
_DASHES = ("", "7 3", "2 2.5", "9 3 2 3", "4 4", "12 3 2 3 2 3", "1 4")
# Marker shapes, cycled with a different period than the dashes.
_MARKERS = ("circle", "square", "triangle", "diamond", "cross", "nabla", "plus")
_MARKER_FILLED = (True, False, True, False, True, False, True)

#: number of distinct styles before the cycle repeats
STYLE_COUNT = len(_DASHES)


def _fmt(value: float) -> str:
    """Format a coordinate with two decimals and no trailing zeros."""
    text = f"{value:.2f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def _esc(text: str) -> str:
    return html.escape(str(text), quote=True)


@dataclass(frozen=True)
class Series:
    """One data series of a plot.

    Parameters
    ----------
    label : str
        Legend text.
    x, y : sequence of float
        Coordinates in data units (for a logarithmic axis: the positive values
        themselves, not their logarithms). Non-finite pairs are skipped.
    kind : {"line", "points", "line+points"}
        How the series is drawn.
    style : int
        Index into the dash/marker/colour cycle; series with different styles
        are distinguishable in grey scale.
    width : float
        Line width [px].
    """

    label: str
    x: Sequence[float]
    y: Sequence[float]
    kind: str = "line"
    style: int = 0
    width: float = 1.8

    def __post_init__(self) -> None:
        if self.kind not in SERIES_KINDS:
            raise ValueError(
                f"unknown series kind {self.kind!r}; valid kinds: {', '.join(SERIES_KINDS)}"
            )
        if len(self.x) != len(self.y):
            raise ValueError(
                f"series {self.label!r}: x has {len(self.x)} values but y has {len(self.y)}"
            )


@dataclass(frozen=True)
class Band:
    """A shaded interval (for example a 95 % confidence band) under the lines.

    Parameters
    ----------
    label : str
        Legend text.
    x, low, high : sequence of float
        Abscissa and the lower and upper edge in data units.
    """

    label: str
    x: Sequence[float]
    low: Sequence[float]
    high: Sequence[float]

    def __post_init__(self) -> None:
        if not (len(self.x) == len(self.low) == len(self.high)):
            raise ValueError(
                f"band {self.label!r}: x, low and high must have the same length "
                f"(got {len(self.x)}, {len(self.low)}, {len(self.high)})"
            )


@dataclass(frozen=True)
class Axis:
    """Axis settings.

    Parameters
    ----------
    label : str
        Axis title including its unit, e.g. ``"time [d]"``.
    log : bool
        Logarithmic (base 10) scale; non-positive values are then skipped.
    limits : (float, float) or None
        Fixed data range; ``None`` takes the range of the data with a margin.
    """

    label: str
    log: bool = False
    limits: tuple[float, float] | None = None
    zero_line: bool = False


@dataclass(frozen=True)
class _Frame:
    left: float
    top: float
    width: float
    height: float
    x0: float
    x1: float
    y0: float
    y1: float
    x_log: bool
    y_log: bool

    def _t(self, v: float, lo: float, hi: float, log: bool) -> float:
        if log:
            v, lo, hi = math.log10(v), math.log10(lo), math.log10(hi)
        return (v - lo) / (hi - lo)

    def px(self, x: float) -> float:
        return self.left + self._t(x, self.x0, self.x1, self.x_log) * self.width

    def py(self, y: float) -> float:
        return self.top + (1.0 - self._t(y, self.y0, self.y1, self.y_log)) * self.height


def nice_ticks(lo: float, hi: float, target: int = 6) -> list[float]:
    """Round tick positions (1, 2, 2.5 or 5 times a power of ten) covering [lo, hi].

    Parameters
    ----------
    lo, hi : float
        Data range (``lo < hi``).
    target : int
        Approximate number of ticks wanted.

    Returns
    -------
    list of float
        Tick positions inside ``[lo, hi]`` (ends included when they fall on a tick).
    """
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        raise ValueError(f"tick range must be finite with lo < hi (got {lo!r}, {hi!r})")
    raw = (hi - lo) / max(target, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    step = power * 10.0
    for mult in (1.0, 2.0, 2.5, 5.0, 10.0):
        if mult * power >= raw:
            step = mult * power
            break
    first = math.ceil(lo / step - 1e-9) * step
    ticks = []
    value = first
    while value <= hi + step * 1e-9:
        ticks.append(0.0 if abs(value) < step * 1e-9 else value)
        value = first + len(ticks) * step
    return ticks


def log_ticks(lo: float, hi: float) -> list[float]:
    """Tick positions for a base-10 logarithmic axis covering [lo, hi].

    Whole decades when the range spans at least two decades (thinned to at most
    eight labels), otherwise 1-2-5 steps within the decades.

    Parameters
    ----------
    lo, hi : float
        Positive data range (``0 < lo < hi``).
    """
    if not (lo > 0 and hi > lo and math.isfinite(hi)):
        raise ValueError(f"log axis range must satisfy 0 < lo < hi (got {lo!r}, {hi!r})")
    d0 = math.floor(math.log10(lo) + 1e-9)
    d1 = math.ceil(math.log10(hi) - 1e-9)
    if d1 - d0 >= 2:
        step = max(1, math.ceil((d1 - d0) / 8))
        return [10.0**d for d in range(d0, d1 + 1) if (d - d0) % step == 0 and
                lo * (1 - 1e-9) <= 10.0**d <= hi * (1 + 1e-9)]
    ticks = []
    for d in range(d0, d1 + 1):
        for m in (1.0, 2.0, 5.0):
            v = m * 10.0**d
            if lo * (1 - 1e-9) <= v <= hi * (1 + 1e-9):
                ticks.append(v)
    return ticks


_SUPERSCRIPT = str.maketrans(
    "-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079")


def _tick_label(value: float, log: bool, step: float) -> str:
    if log:
        exponent = math.log10(value)
        if abs(exponent - round(exponent)) < 1e-9:
            e = int(round(exponent))
            if 0 <= e <= 3:
                return f"{10**e:g}"
            return "10" + str(e).translate(_SUPERSCRIPT)
        return f"{value:.3g}"
    if value == 0:
        return "0"
    if abs(value) >= 1e5 or abs(value) < 1e-3:
        return f"{value:.2g}"
    decimals = max(0, -math.floor(math.log10(step) + 1e-9)) if step > 0 else 0
    if step > 0 and abs(step * 10**decimals - round(step * 10**decimals)) > 1e-6:
        decimals += 1
    return f"{value:.{decimals}f}".replace("-", "\u2212")


def _valid(v: float, log: bool) -> bool:
    return v is not None and math.isfinite(v) and (v > 0 if log else True)


def _data_range(values: list[float], log: bool, limits: tuple[float, float] | None,
                pad: float = 0.05) -> tuple[float, float]:
    if limits is not None:
        lo, hi = float(limits[0]), float(limits[1])
        if not (hi > lo) or (log and lo <= 0):
            raise ValueError(f"axis limits must satisfy lo < hi (and lo > 0 on a log axis): "
                             f"got {limits!r}")
        return lo, hi
    good = [v for v in values if _valid(v, log)]
    if not good:
        return (0.1, 10.0) if log else (0.0, 1.0)
    lo, hi = min(good), max(good)
    if log:
        llo, lhi = math.log10(lo), math.log10(hi)
        if lhi - llo < 1e-9:
            llo, lhi = llo - 0.5, lhi + 0.5
        span = lhi - llo
        return 10 ** (llo - pad * span), 10 ** (lhi + pad * span)
    if hi - lo < 1e-12 * max(1.0, abs(hi)):
        half = max(abs(hi) * 0.1, 0.5)
        return lo - half, hi + half
    span = hi - lo
    return lo - pad * span, hi + pad * span


def _marker_path(shape: str, cx: float, cy: float, r: float) -> str:
    c, s = _fmt, r
    if shape == "circle":
        return (f"M{c(cx - s)},{c(cy)}a{c(s)},{c(s)} 0 1,0 {c(2 * s)},0"
                f"a{c(s)},{c(s)} 0 1,0 {c(-2 * s)},0Z")
    if shape == "square":
        q = s * 0.88
        return f"M{c(cx - q)},{c(cy - q)}h{c(2 * q)}v{c(2 * q)}h{c(-2 * q)}Z"
    if shape == "triangle":
        return (f"M{c(cx)},{c(cy - 1.15 * s)}L{c(cx + s)},{c(cy + 0.75 * s)}"
                f"L{c(cx - s)},{c(cy + 0.75 * s)}Z")
    if shape == "nabla":
        return (f"M{c(cx)},{c(cy + 1.15 * s)}L{c(cx + s)},{c(cy - 0.75 * s)}"
                f"L{c(cx - s)},{c(cy - 0.75 * s)}Z")
    if shape == "diamond":
        q = s * 1.2
        return f"M{c(cx)},{c(cy - q)}L{c(cx + q)},{c(cy)}L{c(cx)},{c(cy + q)}L{c(cx - q)},{c(cy)}Z"
    if shape == "cross":
        q = s * 0.85
        return (f"M{c(cx - q)},{c(cy - q)}L{c(cx + q)},{c(cy + q)}"
                f"M{c(cx - q)},{c(cy + q)}L{c(cx + q)},{c(cy - q)}")
    # plus
    q = s * 1.05
    return f"M{c(cx - q)},{c(cy)}H{c(cx + q)}M{c(cx)},{c(cy - q)}V{c(cy + q)}"


def _style(index: int) -> tuple[str, str, str, bool]:
    i = index % STYLE_COUNT
    return _INKS[i], _DASHES[i], _MARKERS[i], _MARKER_FILLED[i]


def _marker_attrs(ink: str, shape: str, filled: bool) -> str:
    if shape in ("cross", "plus"):
        return f'fill="none" stroke="{ink}" stroke-width="1.6"'
    fill = ink if filled else "#ffffff"
    return f'fill="{fill}" stroke="{ink}" stroke-width="1.3"'


def plot(
    series: Sequence[Series],
    *,
    x_axis: Axis,
    y_axis: Axis,
    title: str = "",
    bands: Sequence[Band] = (),
    width: int = 640,
    height: int = 380,
    legend: bool = True,
    note: str = "",
    top_axis: tuple[str, Sequence[tuple[float, str]]] | None = None,
    plot_id: str = "",
    legend_position: str = "right",
) -> str:
    """Render a complete ``<svg>`` element.

    Parameters
    ----------
    series : sequence of Series
        Lines and point sets, drawn in order (later on top).
    x_axis, y_axis : Axis
        Axis titles (with units), scales and optional limits.
    title : str
        Plot title, drawn above the frame.
    bands : sequence of Band
        Shaded intervals drawn beneath the series.
    width, height : int
        Size of the whole picture [px]; the legend sits at the right inside it.
    legend : bool
        Draw a legend of series and bands.
    note : str
        A small line of text under the x axis title (e.g. what the points are).
    top_axis : (str, sequence of (x, label)) or None
        Optional secondary tick labels along the top edge at given x positions
        (e.g. temperatures in °C over a 1000/T axis), with the given title.
    plot_id : str
        Value of the ``data-plot`` attribute, for finding the plot in a page.
    legend_position : {"right", "bottom"}
        Legend beside the frame (wide plots) or in rows under it (narrow plots; the
        picture then grows in height as needed).

    Returns
    -------
    str
        The SVG markup (UTF-8 text, no XML prolog), suitable for inline HTML.
    """
    xs: list[float] = []
    ys: list[float] = []
    for s in series:
        for xv, yv in zip(s.x, s.y):
            if _valid(xv, x_axis.log) and _valid(yv, y_axis.log):
                xs.append(float(xv))
                ys.append(float(yv))
    for b in bands:
        for xv, lo, hi in zip(b.x, b.low, b.high):
            if _valid(xv, x_axis.log):
                for yv in (lo, hi):
                    if _valid(yv, y_axis.log):
                        xs.append(float(xv))
                        ys.append(float(yv))
    x0, x1 = _data_range(xs, x_axis.log, x_axis.limits, pad=0.03)
    y0, y1 = _data_range(ys, y_axis.log, y_axis.limits, pad=0.06)

    if legend_position not in ("right", "bottom"):
        raise ValueError(f"unknown legend position {legend_position!r}; valid: right, bottom")
    legend_entries = [b.label for b in bands if b.label] + [s.label for s in series if s.label]
    legend_w = 0
    legend_rows: list[list[tuple[str, object]]] = []
    show_legend = legend and bool(legend_entries)
    if show_legend and legend_position == "right":
        longest = max(len(t) for t in legend_entries)
        legend_w = int(min(260, max(110, 50 + 6.4 * longest)))
    left, right = 68.0, 14.0 + legend_w
    top = 34.0 + (26.0 if top_axis else 0.0)
    bottom = 52.0 + (14.0 if note else 0.0)
    if show_legend and legend_position == "bottom":
        legend_rows = _legend_rows([*[("band", b) for b in bands if b.label],
                                    *[("series", x) for x in series if x.label]],
                                   width - left - right)
    frame = _Frame(left, top, max(width - left - right, 60.0), max(height - top - bottom, 60.0),
                   x0, x1, y0, y1, x_axis.log, y_axis.log)
    if legend_rows:  # the picture grows below the frame for a bottom legend
        height = int(height + 17 * len(legend_rows) + 6)

    out: list[str] = []
    out.append(
        f'<svg xmlns="http://www.w3.org/2000/svg" class="fr-plot" data-plot="{_esc(plot_id)}" '
        f'data-series="{len(series)}" '
        f'width="{width}" height="{height}" viewBox="0 0 {width} {height}" role="img" '
        f'aria-label="{_esc(title or y_axis.label)}" '
        f'font-family="Source Sans Pro, Segoe UI, Helvetica, Arial, sans-serif" font-size="12">'
    )
    if title:
        out.append(f"<title>{_esc(title)}</title>")
    clip_id = f"clip-{abs(hash((plot_id, title, width, height, len(series)))) % 10**8}"
    out.append(
        f'<defs><clipPath id="{clip_id}"><rect x="{_fmt(frame.left)}" y="{_fmt(frame.top)}" '
        f'width="{_fmt(frame.width)}" height="{_fmt(frame.height)}"/></clipPath></defs>'
    )
    out.append(f'<rect x="0" y="0" width="{width}" height="{height}" fill="#ffffff"/>')
    out.append(
        f'<rect class="frame-bg" x="{_fmt(frame.left)}" y="{_fmt(frame.top)}" '
        f'width="{_fmt(frame.width)}" height="{_fmt(frame.height)}" fill="#fbfaf6"/>'
    )
    if title:
        out.append(
            f'<text x="{_fmt(frame.left)}" y="{_fmt(18 if not top_axis else 16)}" font-size="14" '
            f'font-weight="600" fill="#1d1d1d">{_esc(title)}</text>'
        )

    # grid and ticks
    out.append(_axis_ticks(frame, x_axis, horizontal=True))
    out.append(_axis_ticks(frame, y_axis, horizontal=False))
    if top_axis:
        out.append(_top_axis(frame, top_axis))

    if y_axis.zero_line and not y_axis.log and y0 < 0 < y1:
        yz = frame.py(0.0)
        out.append(
            f'<line class="zero" x1="{_fmt(frame.left)}" x2="{_fmt(frame.left + frame.width)}" '
            f'y1="{_fmt(yz)}" y2="{_fmt(yz)}" stroke="#555" stroke-width="1"/>'
        )

    out.append(f'<g clip-path="url(#{clip_id})">')
    for b in bands:
        d = _band_path(frame, b)
        if d:
            out.append(f'<path class="band" d="{d}" fill="#8f9aa8" fill-opacity="0.28" '
                       f'stroke="#6c7683" stroke-width="0.6" stroke-dasharray="3 2">'
                       f'<title>{_esc(b.label)}</title></path>')
    for s in series:
        out.append(_series_markup(frame, s))
    out.append("</g>")

    # frame on top of data
    out.append(
        f'<rect x="{_fmt(frame.left)}" y="{_fmt(frame.top)}" width="{_fmt(frame.width)}" '
        f'height="{_fmt(frame.height)}" fill="none" stroke="#333" stroke-width="1"/>'
    )
    # axis titles
    out.append(
        f'<text class="axis-label" x="{_fmt(frame.left + frame.width / 2)}" '
        f'y="{_fmt(frame.top + frame.height + 38)}" text-anchor="middle" fill="#1d1d1d">'
        f"{_esc(x_axis.label)}</text>"
    )
    ymid = frame.top + frame.height / 2
    out.append(
        f'<text class="axis-label" x="16" y="{_fmt(ymid)}" text-anchor="middle" '
        f'transform="rotate(-90 16 {_fmt(ymid)})" fill="#1d1d1d">{_esc(y_axis.label)}</text>'
    )
    if note:
        out.append(
            f'<text class="note" x="{_fmt(frame.left)}" y="{_fmt(frame.top + frame.height + 54)}" '
            f'font-size="10.5" fill="#555">{_esc(note)}</text>'
        )
    if show_legend and legend_position == "right":
        out.append(_legend(frame.left + frame.width + 12, frame.top, legend_w - 4, series, bands))
    elif show_legend:
        out.append(_legend_bottom(frame.left, frame.top + frame.height + bottom - 4, legend_rows))
    out.append("</svg>")
    return "".join(out)


def _axis_ticks(frame: _Frame, axis: Axis, *, horizontal: bool) -> str:
    lo, hi = (frame.x0, frame.x1) if horizontal else (frame.y0, frame.y1)
    if axis.log:
        ticks = log_ticks(lo, hi)
        step = 0.0
    else:
        ticks = nice_ticks(lo, hi, 7 if horizontal else 6)
        step = ticks[1] - ticks[0] if len(ticks) > 1 else 0.0
    parts = ['<g class="ticks">']
    if axis.log and len(ticks) > 1 and ticks[1] / ticks[0] > 10.5:
        # labels skip decades: faint unlabelled lines at the decades in between
        d0, d1 = math.ceil(math.log10(lo) - 1e-9), math.floor(math.log10(hi) + 1e-9)
        for d in range(d0, d1 + 1):
            v = 10.0 ** d
            if any(abs(v / t - 1) < 1e-9 for t in ticks):
                continue
            if horizontal:
                x = frame.px(v)
                parts.append(f'<line x1="{_fmt(x)}" x2="{_fmt(x)}" y1="{_fmt(frame.top)}" '
                             f'y2="{_fmt(frame.top + frame.height)}" stroke="#ebe7dc" '
                             f'stroke-width="0.6"/>')
            else:
                y = frame.py(v)
                parts.append(f'<line x1="{_fmt(frame.left)}" '
                             f'x2="{_fmt(frame.left + frame.width)}" y1="{_fmt(y)}" '
                             f'y2="{_fmt(y)}" stroke="#ebe7dc" stroke-width="0.6"/>'
                             f'<line x1="{_fmt(frame.left - 3)}" x2="{_fmt(frame.left)}" '
                             f'y1="{_fmt(y)}" y2="{_fmt(y)}" stroke="#333"/>')
    for t in ticks:
        label = _esc(_tick_label(t, axis.log, step))
        if horizontal:
            x = frame.px(t)
            parts.append(
                f'<line x1="{_fmt(x)}" x2="{_fmt(x)}" y1="{_fmt(frame.top)}" '
                f'y2="{_fmt(frame.top + frame.height)}" stroke="#dcd8cc" stroke-width="0.7"/>'
                f'<line x1="{_fmt(x)}" x2="{_fmt(x)}" y1="{_fmt(frame.top + frame.height)}" '
                f'y2="{_fmt(frame.top + frame.height + 5)}" stroke="#333"/>'
                f'<text x="{_fmt(x)}" y="{_fmt(frame.top + frame.height + 18)}" '
                f'text-anchor="middle" fill="#333">{label}</text>'
            )
        else:
            y = frame.py(t)
            parts.append(
                f'<line x1="{_fmt(frame.left)}" x2="{_fmt(frame.left + frame.width)}" '
                f'y1="{_fmt(y)}" y2="{_fmt(y)}" stroke="#dcd8cc" stroke-width="0.7"/>'
                f'<line x1="{_fmt(frame.left - 5)}" x2="{_fmt(frame.left)}" y1="{_fmt(y)}" '
                f'y2="{_fmt(y)}" stroke="#333"/>'
                f'<text x="{_fmt(frame.left - 8)}" y="{_fmt(y + 4)}" text-anchor="end" '
                f'fill="#333">{label}</text>'
            )
    parts.append("</g>")
    return "".join(parts)


def _top_axis(frame: _Frame, top_axis: tuple[str, Sequence[tuple[float, str]]]) -> str:
    title, marks = top_axis
    parts = ['<g class="top-ticks">']
    for xv, label in marks:
        if not _valid(xv, frame.x_log):
            continue
        lo, hi = sorted((frame.x0, frame.x1))
        if not lo <= xv <= hi:
            continue
        x = frame.px(xv)
        parts.append(
            f'<line x1="{_fmt(x)}" x2="{_fmt(x)}" y1="{_fmt(frame.top - 5)}" '
            f'y2="{_fmt(frame.top)}" stroke="#333"/>'
            f'<text x="{_fmt(x)}" y="{_fmt(frame.top - 8)}" text-anchor="middle" '
            f'font-size="10.5" fill="#444">{_esc(label)}</text>'
        )
    parts.append(
        f'<text x="{_fmt(frame.left + frame.width)}" y="{_fmt(frame.top - 22)}" '
        f'text-anchor="end" font-size="10.5" fill="#444">{_esc(title)}</text>'
    )
    parts.append("</g>")
    return "".join(parts)


def _segments(frame: _Frame, x: Sequence[float],
              y: Sequence[float]) -> list[list[tuple[float, float]]]:
    segs: list[list[tuple[float, float]]] = []
    current: list[tuple[float, float]] = []
    for xv, yv in zip(x, y):
        if _valid(xv, frame.x_log) and _valid(yv, frame.y_log):
            current.append((frame.px(float(xv)), frame.py(float(yv))))
        elif current:
            segs.append(current)
            current = []
    if current:
        segs.append(current)
    return segs


def _band_path(frame: _Frame, band: Band) -> str:
    pieces = []
    run: list[tuple[float, float, float]] = []

    def flush() -> None:
        if len(run) >= 2:
            up = "L".join(f"{_fmt(px)},{_fmt(ph)}" for px, _, ph in run)
            down = "L".join(f"{_fmt(px)},{_fmt(pl)}" for px, pl, _ in reversed(run))
            pieces.append(f"M{up}L{down}Z")
        run.clear()

    for xv, lo, hi in zip(band.x, band.low, band.high):
        if _valid(xv, frame.x_log) and _valid(lo, frame.y_log) and _valid(hi, frame.y_log):
            run.append((frame.px(float(xv)), frame.py(float(lo)), frame.py(float(hi))))
        else:
            flush()
    flush()
    return "".join(pieces)


def _series_markup(frame: _Frame, s: Series) -> str:
    ink, dash, shape, filled = _style(s.style)
    segs = _segments(frame, s.x, s.y)
    label = _esc(s.label)
    parts = [f'<g class="series-group" data-label="{label}">']
    has_line = s.kind in ("line", "line+points")
    if has_line:
        d = "".join("M" + "L".join(f"{_fmt(px)},{_fmt(py)}" for px, py in seg) for seg in segs)
        dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
        parts.append(
            f'<path class="series" data-label="{label}" d="{d or "M0,0"}" fill="none" '
            f'stroke="{ink}" stroke-width="{_fmt(s.width)}" stroke-linejoin="round" '
            f'stroke-linecap="butt"{dash_attr}><title>{label}</title></path>'
        )
    if s.kind in ("points", "line+points"):
        d = "".join(_marker_path(shape, px, py, 3.6) for seg in segs for px, py in seg)
        cls = "markers" if has_line else "series points"
        parts.append(
            f'<path class="{cls}" data-label="{label}" d="{d or "M0,0"}" '
            f'{_marker_attrs(ink, shape, filled)}><title>{label}</title></path>'
        )
    parts.append("</g>")
    return "".join(parts)


def _legend(x: float, y: float, w: float, series: Sequence[Series], bands: Sequence[Band]) -> str:
    entries = [*[("band", b) for b in bands if b.label],
               *[("series", s) for s in series if s.label]]
    row = 17.0
    parts = ['<g class="legend">',
             f'<rect x="{_fmt(x)}" y="{_fmt(y)}" width="{_fmt(w)}" '
             f'height="{_fmt(len(entries) * row + 10)}" fill="#ffffff" stroke="#bbb" '
             f'stroke-width="0.8" rx="3"/>']
    cy = y + 5 + row / 2
    for kind, item in entries:
        parts.append(_legend_key(kind, item, x, cy))
        parts.append(f'<text x="{_fmt(x + 38)}" y="{_fmt(cy + 4)}" fill="#222" font-size="11">'
                     f"{_esc(item.label)}</text>")
        cy += row
    parts.append("</g>")
    return "".join(parts)


def _entry_width(label: str) -> float:
    return 46.0 + 6.4 * len(label)


def _legend_rows(entries: list[tuple[str, object]], width: float) -> list[list[tuple[str, object]]]:
    rows: list[list[tuple[str, object]]] = [[]]
    used = 0.0
    for kind, item in entries:
        w = _entry_width(item.label)  # type: ignore[attr-defined]
        if rows[-1] and used + w > width:
            rows.append([])
            used = 0.0
        rows[-1].append((kind, item))
        used += w
    return [r for r in rows if r]


def _legend_key(kind: str, item: object, x: float, cy: float) -> str:
    if kind == "band":
        return (f'<rect x="{_fmt(x + 8)}" y="{_fmt(cy - 5)}" width="24" height="10" '
                f'fill="#8f9aa8" fill-opacity="0.28" stroke="#6c7683" stroke-width="0.6" '
                f'stroke-dasharray="3 2"/>')
    s: Series = item  # type: ignore[assignment]
    ink, dash, shape, filled = _style(s.style)
    parts = []
    if s.kind in ("line", "line+points"):
        dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
        parts.append(
            f'<line x1="{_fmt(x + 6)}" x2="{_fmt(x + 34)}" y1="{_fmt(cy)}" y2="{_fmt(cy)}" '
            f'stroke="{ink}" stroke-width="{_fmt(s.width)}"{dash_attr}/>')
    if s.kind in ("points", "line+points"):
        parts.append(f'<path d="{_marker_path(shape, x + 20, cy, 3.6)}" '
                     f'{_marker_attrs(ink, shape, filled)}/>')
    return "".join(parts)


def _legend_bottom(x0: float, y0: float, rows: list[list[tuple[str, object]]]) -> str:
    parts = ['<g class="legend">']
    cy = y0 + 8
    for row in rows:
        x = x0 - 6
        for kind, item in row:
            label = item.label  # type: ignore[attr-defined]
            parts.append(_legend_key(kind, item, x, cy))
            parts.append(f'<text x="{_fmt(x + 38)}" y="{_fmt(cy + 4)}" fill="#222" '
                         f'font-size="11">{_esc(label)}</text>')
            x += _entry_width(label)
        cy += 17
    parts.append("</g>")
    return "".join(parts)
