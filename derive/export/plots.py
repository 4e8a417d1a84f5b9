"""Plots of sensitivities and tolerance spreads, as :class:`derive.derivation.steps.Figure` objects.

Drawing uses matplotlib's object-oriented API on an Agg canvas (no screen, no global pyplot
state). Each figure holds only the numbers it needs (a histogram is stored as counts and bin
edges, not as the samples); ``draw(path)`` writes the image, its format following the
extension (``.png``, ``.pdf``, ``.svg``).

>>> import os, tempfile
>>> fig = sensitivity_figure("demo", "Demo", ["R1", "R2"], [-0.5, 0.5])
>>> p = os.path.join(tempfile.mkdtemp(), "demo.png")
>>> fig.draw(p); os.path.getsize(p) > 1000
True
"""
from __future__ import annotations

from derive.derivation.steps import Figure


def _new(width=6.0, height=3.2):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure as MplFigure
    fig = MplFigure(figsize=(width, height), dpi=150)
    FigureCanvasAgg(fig)
    return fig, fig.add_subplot(1, 1, 1)


def sensitivity_figure(name: str, caption: str, symbols: list, values: list) -> Figure:
    """A ranked horizontal bar chart of normalized sensitivities (None values skipped)."""
    pairs = [(s, float(v)) for s, v in zip(symbols, values) if v is not None]
    pairs.sort(key=lambda p: -abs(p[1]))

    def draw(path: str) -> None:
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

    return Figure(name, caption, draw)


def histogram_figure(name: str, caption: str, counts, edges, quantity: str, unit: str | None,
                     marks: dict) -> Figure:
    """A histogram (``counts`` over bin ``edges``) with vertical lines at ``marks``
    (label -> (low, high)); e.g. the worst-case and extreme-value limits."""
    counts = [float(c) for c in counts]
    edges = [float(e) for e in edges]
    styles = [("#b5533c", "--"), ("#2e7d32", ":"), ("#6a4c93", "-.")]

    def draw(path: str) -> None:
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

    return Figure(name, caption, draw)
