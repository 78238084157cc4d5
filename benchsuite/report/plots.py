"""Figures as inline SVG strings (matplotlib, Agg canvas, no pyplot state).

The SVG is made to sit inside an HTML page: no XML prolog, DOCTYPE, metadata
or namespace declarations (the HTML parser supplies SVG's), text kept as
``<text>`` (small, searchable, printed sharply), element ids salted per figure
and prefixed per figure so that several figures in one page never share an
id, and no date, so the
same data gives the same bytes.  Series differ by marker and line style as
well as colour.
"""

from __future__ import annotations

import io
import math
import re

import matplotlib
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter

#: (colour, marker, line style) per method, in order; the reference is black.
SERIES_STYLES = (("#1f5f8b", "s", "--"), ("#b5561b", "^", "-."), ("#5b8c2a", "D", ":"),
                 ("#7a3f8f", "v", (0, (5, 1, 1, 1))), ("#8b6d1f", "P", (0, (3, 1))),
                 ("#2a7f7f", "X", (0, (1, 1))))
BAND_COLOUR = "#e1f0e7"

_PROLOG = re.compile(r"<\?xml[^>]*\?>\s*|<!DOCTYPE[^>]*>\s*", re.S)
_METADATA = re.compile(r"<metadata>.*?</metadata>\s*", re.S)
_XMLNS = re.compile(r'\s+xmlns(?::\w+)?="[^"]*"')
_SIZE = re.compile(r'(<svg[^>]*?)\s+width="[^"]*"\s+height="[^"]*"', re.S)
_ID = re.compile(r'(?<=\s)id="([^"]+)"')
_REF = re.compile(r'(url\(#|href="#)([^)"]+)')


def _prefix_ids(svg: str, prefix: str) -> str:
    """Every id and every internal reference to one, prefixed: ids stay unique in a page of figures."""
    svg = _ID.sub(lambda m: f'id="{prefix}-{m.group(1)}"', svg)
    return _REF.sub(lambda m: f"{m.group(1)}{prefix}-{m.group(2)}", svg)


def mpl_text(label: str) -> str:
    """A label matplotlib prints literally (a ``$`` would start mathtext)."""
    return str(label).replace("$", r"\$")


def figure_svg(fig: Figure, salt: str, title: str) -> str:
    """``fig`` as an SVG element for inline use, labelled ``title`` for screen readers."""
    buf = io.StringIO()
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": salt}):
        fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None, "Format": None, "Type": None})
    svg = _METADATA.sub("", _PROLOG.sub("", buf.getvalue()))
    svg = _XMLNS.sub("", _SIZE.sub(r"\1", svg, count=1))
    svg = _prefix_ids(svg, re.sub(r"[^A-Za-z0-9_-]", "-", salt))
    esc = title.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").replace('"', "&quot;")
    return svg.replace("<svg", f'<svg role="img" aria-label="{esc}"', 1).strip()


def _new_figure(width: float, height: float) -> Figure:
    fig = Figure(figsize=(width, height), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


#: The |error| axis never reaches below this (mHa): smaller errors sit on the floor, marked.
ERROR_FLOOR_MHA = 1e-3


def error_axis_limits(errors_mha, threshold_mha: float) -> tuple[float, float]:
    """(bottom, top) of the log |error| axis in mHa: from the floor (or a decade under the smallest
    error, if higher) to a decade over the largest error, always showing the threshold line."""
    sizes = [abs(e) for e in errors_mha if e is not None and e != 0.0]
    low = max(ERROR_FLOOR_MHA, min(sizes + [threshold_mha]) / 10.0)
    high = max(sizes + [threshold_mha]) * 3.0
    return 10 ** math.floor(math.log10(low)), 10 ** math.ceil(math.log10(high))


def _error_series(ax, s, style, bottom: float) -> None:
    """|error| of one method: filled markers above the reference, open ones below, floor clipped."""
    colour, marker, line = style
    sizes = [None if e is None else max(abs(e), bottom) for e in s.errors]
    ax.plot(s.lengths, [float("nan") if v is None else v for v in sizes], color=colour, ls=line, lw=1.2)
    for x, e, v in zip(s.lengths, s.errors, sizes):
        if e is None:
            continue
        clipped = abs(e) < bottom          # at the floor the sign is noise: one marker for both
        ax.plot([x], [v], marker="v" if clipped else marker, ms=5, color=colour, ls="none", clip_on=False,
                markerfacecolor="white" if e < 0 and not clipped else colour, markeredgewidth=1.1)
    if any(x is not None for x in s.sigmas_mha):
        ys = [float("nan") if v is None else v for v in sizes]
        err = [0.0 if x is None else x for x in s.sigmas_mha]
        lower = [0.0 if math.isnan(y) else min(sigma, y - bottom) for sigma, y in zip(err, ys)]
        ax.errorbar(s.lengths, ys, yerr=[lower, err], color=colour, ls="none", capsize=2, lw=0.9)


def scan_svg(scan, salt: str) -> str:
    """Curve of one scan: energies (top) and |error| in mHa on a log axis (bottom) with the
    threshold as a line, the region within it shaded; below-reference points drawn open."""
    fig = _new_figure(7.4, 5.8)
    top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2.4))
    unit = getattr(scan, "length_unit", "Å")
    top.plot(scan.lengths, scan.reference_energies, color="black", lw=1.6, marker="o", ms=3.5,
             label=mpl_text(f"{scan.reference_method or 'reference'} (reference)"))
    thr = scan.threshold_mha
    low, high = error_axis_limits([e for s in scan.series for e in s.errors], thr)
    bottom.set_yscale("log")
    bottom.set_ylim(low, high)
    bottom.axhspan(low, thr, color=BAND_COLOUR, lw=0)
    bottom.axhline(thr, color="#1e6b47", lw=1.2)
    bottom.annotate(f"threshold {thr:.2f} mHa", xy=(1.0, thr), xycoords=("axes fraction", "data"),
                    xytext=(-4, 3), textcoords="offset points", ha="right", va="bottom", fontsize=7.5,
                    color="#1e6b47")
    floored = []
    for i, s in enumerate(scan.series):
        style = SERIES_STYLES[i % len(SERIES_STYLES)]
        top.plot(s.lengths, s.energies, color=style[0], marker=style[1], ms=4, ls=style[2], lw=1.3,
                 label=mpl_text(s.method))
        _error_series(bottom, s, style, low)
        if any(e is not None and abs(e) < low for e in s.errors):
            floored.append(s.method)
    if floored:
        bottom.annotate(mpl_text(f"▼ at or below {low:g} mHa: " + ", ".join(floored)), xy=(0.01, 0.03),
                        xycoords="axes fraction", ha="left", va="bottom", fontsize=7.5, color="#444444")
    top.set_ylabel("energy / Eh")
    top.legend(fontsize=8, frameon=False)
    bottom.yaxis.set_major_formatter(FuncFormatter(lambda y, _pos: f"{y:g}"))
    bottom.set_ylabel("|error| / mHa")
    bottom.set_xlabel(f"bond length r / {unit}")
    for ax in (top, bottom):
        ax.grid(True, lw=0.4, color="#d5d5d5")
    bottom.grid(True, which="minor", lw=0.2, color="#e6e6e6")
    return figure_svg(fig, salt, f"Curve of {scan.name} in {scan.basis}: energies and errors along the bond")
