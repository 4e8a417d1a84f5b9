"""Drawing of the plots (:class:`derive.derivation.steps.Figure`): sensitivities, tolerance
spreads, Bode plots and noise densities.

The analyses make the figures, holding only the numbers they need (a histogram is stored as
counts and bin edges, not as the samples) and a chart; :func:`draw` draws one with
matplotlib's object-oriented API on an Agg canvas (no screen, no global pyplot state), the
image format following the extension of ``path`` (``.png``, ``.pdf``, ``.svg``).

>>> import os, tempfile
>>> fig = Figure("demo", "Demo", "sensitivity", {"symbols": ["R1", "R2"], "values": [-0.5, 0.5]})
>>> p = os.path.join(tempfile.mkdtemp(), "demo.png")
>>> draw(fig, p); os.path.getsize(p) > 1000
True
"""
from __future__ import annotations

from derive.derivation.steps import Figure
from derive.sheet.units import DEFAULT_DIGITS, format_value


def _new(width=6.0, height=3.2):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure as MplFigure
    fig = MplFigure(figsize=(width, height), dpi=150)
    FigureCanvasAgg(fig)
    return fig, fig.add_subplot(1, 1, 1)


def _draw_sensitivity(data: dict, path: str) -> None:
    """A ranked horizontal bar chart of normalized sensitivities (None values skipped)."""
    pairs = [(s, float(v)) for s, v in zip(data["symbols"], data["values"]) if v is not None]
    pairs.sort(key=lambda p: -abs(p[1]))
    fig, ax = _new(6.0, max(1.6, 0.35 * len(pairs) + 1.0))
    labels = [p[0] for p in pairs][::-1]
    vals = [p[1] for p in pairs][::-1]
    colours = ["#3b6ea8" if v >= 0 else "#b5533c" for v in vals]
    ax.barh(range(len(vals)), vals, color=colours)
    ax.set_yticks(range(len(vals)))
    ax.set_yticklabels(labels)
    ax.axvline(0.0, color="black", linewidth=0.8)
    ax.set_xlabel("normalized sensitivity S = (x/Q)·dQ/dx")
    ax.grid(axis="x", alpha=0.3)
    fig.tight_layout()
    fig.savefig(path)


def _draw_histogram(data: dict, path: str) -> None:
    """A histogram (``counts`` over bin ``edges``) with vertical lines at ``marks``
    (label -> (low, high)); e.g. the worst-case and extreme-value limits."""
    counts, edges, marks = data["counts"], data["edges"], data["marks"]
    quantity, unit = data["quantity"], data["unit"]
    styles = [("#b5533c", "--"), ("#2e7d32", ":"), ("#6a4c93", "-.")]
    fig, ax = _new()
    ax.stairs(counts, edges, fill=True, color="#9db4d3", label="Monte Carlo")
    for (label, (lo, hi)), (col, ls) in zip(marks.items(), styles):
        ax.axvline(lo, color=col, linestyle=ls, label=label)
        ax.axvline(hi, color=col, linestyle=ls)
    ax.set_xlabel(f"{quantity} ({unit})" if unit else quantity)
    ax.set_ylabel("samples per bin")
    ax.ticklabel_format(axis="x", style="sci", scilimits=(-3, 4), useOffset=True)
    ax.legend(fontsize="small")
    fig.tight_layout()
    fig.savefig(path)


def _draw_bode(fig_: Figure, path: str, digits: int = DEFAULT_DIGITS) -> None:
    """Magnitude and phase at nominal values of ``num(s)/den(s)`` (ascending numeric
    coefficients), over the range of :func:`derive.analyses.frequency.bode_data`."""
    from matplotlib.figure import Figure as MplFigure

    from derive.analyses.frequency import bode_data
    data, caption = fig_.data, fig_.caption
    unit = data["unit"]
    f, mag, phase = bode_data(data["num"], data["den"])
    fig = MplFigure(figsize=(6.4, 5.2))
    a1, a2 = fig.subplots(2, 1, sharex=True)
    a1.semilogx(f, mag)
    a1.set_ylabel("magnitude / dB" + (f" re 1 {unit}" if unit and unit not in ("V/V", "A/A")
                                      else ""))
    a1.grid(True, which="both", alpha=0.3)
    a2.semilogx(f, phase)
    marks = data.get("marks") or {}
    for label, value, style in (("f0", marks.get("f0"), "--"),
                                ("fc", marks.get("f_corner"), "--")):
        if value:
            for ax in (a1, a2):
                ax.axvline(value, linestyle=style, linewidth=0.8, color="0.35")
            a1.annotate(f"{label} = {format_value(value, 'Hz', digits)}", (value, a1.get_ylim()[1]),
                        fontsize=7, ha="left", va="top", xytext=(3, -3),
                        textcoords="offset points")
    for value in marks.get("minus_3dB") or []:
        a1.axvline(value, linestyle=":", linewidth=0.8, color="0.2")
        a1.annotate(f"-3 dB: {format_value(value, 'Hz', digits)}", (value, a1.get_ylim()[0]),
                    fontsize=7, ha="left", va="bottom", xytext=(3, 3),
                    textcoords="offset points")
    a2.set_ylabel("phase / degrees")
    a2.set_xlabel("frequency / Hz")
    a2.grid(True, which="both", alpha=0.3)
    a1.set_title(caption, fontsize=9)
    fig.tight_layout()
    fig.savefig(path)


def _draw_noise(fig_: Figure, path: str) -> None:
    """Log-log output noise density (V/√Hz) against frequency: the total and the largest
    contributions (``data``: ``f``, ``total``, ``parts`` name -> densities, ``band``), the
    band of the request shaded."""
    data = fig_.data
    fig, ax = _new(6.4, 3.8)
    ax.loglog(data["f"], data["total"], color="black", linewidth=1.8, label="total")
    styles = ["--", "-.", ":", (0, (5, 2, 1, 2))]
    for (name, ys), ls in zip(data["parts"].items(), styles):
        ax.loglog(data["f"], ys, linestyle=ls, linewidth=1.2, label=name)
    lo, hi = data["band"]
    ax.axvspan(max(lo, data["f"][0]), hi, color="#9db4d3", alpha=0.25, label="band")
    ax.set_xlabel("frequency / Hz")
    ax.set_ylabel("noise density / (V/√Hz)")
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize="small")
    fig.tight_layout()
    fig.savefig(path)


def _drawings() -> dict:
    """The one table of figure charts and the function that draws each."""
    return {"sensitivity": lambda f, path, digits: _draw_sensitivity(f.data, path),
            "histogram": lambda f, path, digits: _draw_histogram(f.data, path),
            "bode": _draw_bode, "noise": lambda f, path, digits: _draw_noise(f, path)}


def can_draw(figure) -> bool:
    """Whether ``figure`` is a :class:`Figure` of a chart that :func:`draw` knows."""
    return isinstance(figure, Figure) and figure.chart in _drawings()


def draw(figure: Figure, path: str, digits: int = DEFAULT_DIGITS) -> None:
    """Write the image of ``figure`` to ``path`` (format from the extension); values marked
    on it with ``digits`` significant figures."""
    drawing = _drawings().get(figure.chart)
    if drawing is None:
        raise ValueError(f"no drawing for a figure chart {figure.chart!r}")
    drawing(figure, path, digits)
