"""Plots and summary tables of runs and batches (matplotlib, headless Agg backend)."""

from __future__ import annotations

import os

import numpy as np

from planners.plan import Plan
from sim.field import Field
from sim.trace import Trace

# Okabe-Ito colour-blind-safe pairs: truth vs estimate, plan in grey.
TRUTH, ESTIMATE, PLAN, REFERENCE = "#0072B2", "#E69F00", "#7f7f7f", "#009E73"


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def draw_field(ax, field: Field) -> None:
    """Walls, obstacles, patches and landmarks on a matplotlib axis (field frame, metres)."""
    b = np.vstack([field.boundary, field.boundary[:1]])
    ax.plot(b[:, 0], b[:, 1], color="black", lw=1.5)
    for ob in field.obstacles:
        ax.fill(ob[:, 0], ob[:, 1], color="#555555", alpha=0.6, lw=0)
    for patch in field.patches:
        ax.fill(patch.polygon[:, 0], patch.polygon[:, 1], color="#56B4E9", alpha=0.25, lw=0)
    if field.landmarks:
        xy = field.landmark_xy
        ax.plot(xy[:, 0], xy[:, 1], "k^", ms=5)
    ax.set_aspect("equal")
    ax.set_xlabel("x [m]")
    ax.set_ylabel("y [m]")


def run_plot(trace: Trace, plan: Plan, field: Field, path: str | os.PathLike, *, column: int = 0, title: str = "") -> None:
    """Path, truth, estimate and reference; errors, speed and battery against time."""
    plt = _pyplot()
    end = trace.end_tick(column) + 1
    t = trace.t[:end]
    pose = trace["pose"][:end, column]
    est = trace["estimate"][:end, column]
    fig, axes = plt.subplots(2, 2, figsize=(12, 8))
    ax = axes[0, 0]
    draw_field(ax, field)
    ax.plot(plan.path_x, plan.path_y, color=PLAN, lw=1, ls="--", label="path")
    ax.plot(pose[:, 0], pose[:, 1], color=TRUTH, lw=1.5, label="truth")
    ax.plot(est[:, 0], est[:, 1], color=ESTIMATE, lw=1, label="estimate")
    ax.legend(loc="best", fontsize=8)
    ax.set_title(title or trace.meta.get("scenario", ""))
    ax = axes[0, 1]
    ax.plot(t, 100 * trace["cross_track"][:end, column], color=TRUTH, label="cross-track [cm]")
    err = np.hypot(*(est[:, :2] - pose[:, :2]).T)
    ax.plot(t, 100 * err, color=ESTIMATE, label="estimate error [cm]")
    ax.set_xlabel("t [s]")
    ax.set_ylabel("cm")
    ax.legend(fontsize=8)
    ax.grid(alpha=0.3)
    ax = axes[1, 0]
    speed = np.hypot(trace["velocity"][:end, column, 0], trace["velocity"][:end, column, 1])
    k = np.minimum(np.arange(end), len(plan.t) - 1)
    ax.plot(t, np.hypot(plan.velocity[k, 0], plan.velocity[k, 1]) * (t <= plan.duration), color=PLAN, label="planned")
    ax.plot(t, speed, color=TRUTH, label="true")
    ax.set_xlabel("t [s]")
    ax.set_ylabel("speed [m/s]")
    ax.legend(fontsize=8)
    ax.grid(alpha=0.3)
    ax = axes[1, 1]
    ax.plot(t, trace["battery"][:end, column], color="#CC79A7")
    ax.set_xlabel("t [s]")
    ax.set_ylabel("battery [V]")
    ax.grid(alpha=0.3)
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)


def box_plot(groups: dict[str, dict[str, list[float]]], keys: list[str], path: str | os.PathLike) -> None:
    """Box plots of some figures per group (``groups[name][key]`` -> values)."""
    plt = _pyplot()
    fig, axes = plt.subplots(1, len(keys), figsize=(5 * len(keys), 4), squeeze=False)
    names = list(groups)
    for ax, key in zip(axes[0], keys):
        data = [np.asarray([v for v in groups[g].get(key, []) if v == v], dtype=float) for g in names]
        ax.boxplot(data, tick_labels=[n[:28] for n in names], orientation="vertical")
        ax.set_title(key)
        ax.tick_params(axis="x", rotation=30, labelsize=7)
        ax.grid(alpha=0.3)
    fig.tight_layout()
    fig.savefig(path, dpi=100)
    plt.close(fig)
