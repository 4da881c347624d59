"""Plots of searches over scenario keys: tune.png (objective against each key), envelope.png."""

from __future__ import annotations

import os
from collections.abc import Sequence

import numpy as np

from sim.report import _pyplot


def tune_plot(outcome, path: str | os.PathLike):
    """Objective of every candidate against each tuned key; the start and the best marked.

    Parameters
    ----------
    outcome : sim.tune.TuneOutcome
    path : PNG file to write

    Returns
    -------
    matplotlib Figure (closed after saving; its axes still hold the plotted data)
    """
    from sim.tune import describe_objective

    plt = _pyplot()
    axes = outcome.axes
    fig, grid = plt.subplots(1, len(axes), figsize=(4.5 * len(axes), 3.8), squeeze=False)
    values = np.array([c.values for c in outcome.candidates], dtype=float).reshape(-1, len(axes))
    obj = np.array([c.objective for c in outcome.candidates])
    best, start = outcome.best, outcome.start
    for j, (ax, axis) in enumerate(zip(grid[0], axes)):
        ax.scatter(values[:, j], obj, s=14, color="#0072B2", alpha=0.7, label="candidates")
        ax.scatter([best.values[j]], [best.objective], s=60, marker="*", color="#D55E00", zorder=3, label="best")
        if start is not None and np.isfinite(start.values[j]):
            ax.axvline(start.values[j], color="#555555", ls="--", lw=1, label="start")
        ax.set_xlim(axis.low, axis.high)
        ax.set_xlabel(axis.label)
        ax.grid(alpha=0.3)
    if obj.size and np.all(obj[np.isfinite(obj)] > 0):
        for ax in grid[0]:
            ax.set_yscale("log")  # a failed run's penalty sits decades above good candidates
    grid[0, 0].set_ylabel(describe_objective(outcome.objective), fontsize=8)
    grid[0, 0].legend(fontsize=7)
    fig.suptitle(f"tune: {len(obj)} candidates x {outcome.runs} runs", fontsize=10)
    fig.tight_layout()
    fig.savefig(path, dpi=100)
    plt.close(fig)
    return fig


def envelope_plot(
    xs: Sequence[float],
    ys: Sequence[float],
    success: np.ndarray,
    end_p95: np.ndarray,
    ok: np.ndarray,
    *,
    x_label: str,
    y_label: str,
    path: str | os.PathLike,
    title: str = "",
):
    """Heat map of the p95 end error over the grid, each cell annotated, qualifying cells outlined.

    Parameters
    ----------
    xs, ys : grid values of the x axis (columns) and the y axis (rows)
    success, end_p95, ok : ndarray, shape (len(ys), len(xs)) — success rate [0-1] (runs that
        completed without collision and stayed on the path), p95 end position error [m], cell
        meets the envelope's criteria
    x_label, y_label : axis labels
    path : PNG file to write

    Returns
    -------
    matplotlib Figure (closed after saving); x ticks are the xs, y ticks the ys
    """
    from matplotlib.patches import Rectangle

    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(1.3 * len(xs) + 2.5, 0.9 * len(ys) + 2.0))
    from matplotlib.colors import LogNorm

    shown = np.where(np.isfinite(end_p95), np.maximum(end_p95, 1e-4), np.nan) * 100.0  # cm, floor 1 mm
    norm = LogNorm() if np.isfinite(shown).any() else None  # errors span mm to metres
    im = ax.imshow(shown, origin="lower", cmap="viridis_r", aspect="auto", norm=norm)
    fig.colorbar(im, ax=ax, label="p95 end position error [cm]")
    for i in range(len(ys)):
        for j in range(len(xs)):
            err = "fail" if not np.isfinite(end_p95[i, j]) else f"{100 * end_p95[i, j]:.1f} cm"
            ax.text(j, i, f"{100 * success[i, j]:.0f}%\n{err}", ha="center", va="center", fontsize=7,
                    color="white" if not ok[i, j] else "black",
                    bbox=None if not ok[i, j] else {"facecolor": "white", "alpha": 0.6, "lw": 0})
            if ok[i, j]:
                ax.add_patch(Rectangle((j - 0.5, i - 0.5), 1, 1, fill=False, lw=2, ec="#D55E00"))
    ax.set_xticks(range(len(xs)), [f"{x:.3g}" for x in xs])
    ax.set_yticks(range(len(ys)), [f"{y:.3g}" for y in ys])
    ax.set_xlabel(x_label)
    ax.set_ylabel(y_label)
    ax.set_title(title or "success rate and p95 end error (outlined: within the envelope)", fontsize=9)
    fig.tight_layout()
    fig.savefig(path, dpi=100)
    plt.close(fig)
    return fig
