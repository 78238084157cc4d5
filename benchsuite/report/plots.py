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
import re

import matplotlib
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

#: (colour, marker, line style) per method, in order; the reference is black.
SERIES_STYLES = (("#1f5f8b", "s", "--"), ("#b5561b", "^", "-."), ("#5b8c2a", "D", ":"),
                 ("#7a3f8f", "v", (0, (5, 1, 1, 1))), ("#8b6d1f", "P", (0, (3, 1))),
                 ("#2a7f7f", "X", (0, (1, 1))))
BAND_COLOUR = "#d5eadf"

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


def scan_svg(scan, salt: str) -> str:
    """Dissociation curve of one scan: energies (top) and errors in mHa inside the
    +/- threshold band (bottom, symmetric-log scale once errors dwarf the band)."""
    fig = _new_figure(7.4, 5.6)
    top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    top.plot(scan.lengths, scan.reference_energies, color="black", lw=1.6, marker="o", ms=4,
             label=mpl_text(f"{scan.reference_method or 'reference'} (reference)"))
    thr = scan.threshold_mha
    bottom.axhspan(-thr, thr, color=BAND_COLOUR, lw=0)
    bottom.axhline(0.0, color="black", lw=0.8)
    worst = thr
    for i, s in enumerate(scan.series):
        colour, marker, style = SERIES_STYLES[i % len(SERIES_STYLES)]
        label = mpl_text(s.method)
        top.plot(s.lengths, s.energies, color=colour, marker=marker, ms=4, ls=style, lw=1.3, label=label)
        errs = [e for e in s.errors if e is not None]
        worst = max([worst] + [abs(e) for e in errs])
        sigma = s.sigmas_mha if any(x is not None for x in s.sigmas_mha) else None
        bottom.errorbar(s.lengths, [float("nan") if e is None else e for e in s.errors],
                        yerr=None if sigma is None else [0.0 if x is None else x for x in sigma],
                        color=colour, marker=marker, ms=4, ls=style, lw=1.3, capsize=2)
    if worst > 8 * thr:
        bottom.set_yscale("symlog", linthresh=thr, linscale=1.0)
    top.set_ylabel("energy / Eh")
    top.set_title(mpl_text(f"{scan.name}  [{scan.basis}, {scan.encoding}]"), fontsize=10)
    top.legend(fontsize=8, frameon=False)
    bottom.set_ylabel("error / mHa")
    bottom.set_xlabel("bond length / Å")
    bottom.set_title(f"error; shaded: the ±{thr:.4f} mHa pass band", fontsize=8, loc="left")
    for ax in (top, bottom):
        ax.grid(True, lw=0.4, color="#cccccc")
    return figure_svg(fig, salt, f"Dissociation curve of {scan.name} in {scan.basis}: energies and errors")
