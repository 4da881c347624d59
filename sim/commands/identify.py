"""``skidpad identify --kind KIND LOG``: model constants from a robot log.

:data:`KINDS` maps each ``--kind`` to its handler (takes the parsed arguments, returns the exit
code). ``feedforward`` lives here; the geometry kinds (``track-width``, ``odometry``) come from
:mod:`sim.identify_odometry` when it is installed.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Callable
from pathlib import Path


def _plot_residuals(fit, path: Path, title: str) -> None:
    """Residual [V] against time and against wheel speed, one colour per wheel label."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, (by_t, by_v) = plt.subplots(2, 1, figsize=(8, 6))
    for w, wf in fit.wheels.items():
        by_t.plot(wf.t, wf.fit.residuals, ".", ms=2, label=w)
        by_v.plot(wf.v, wf.fit.residuals, ".", ms=2, label=w)
    by_t.set_xlabel("time [s]")
    by_v.set_xlabel("wheel speed [rad/s]")
    for ax in (by_t, by_v):
        ax.axhline(0.0, color="k", lw=0.5)
        ax.set_ylabel("residual u - fit [V]")
        ax.legend(markerscale=4, fontsize="small")
    by_t.set_title(title)
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)


def feedforward_report(fit, source: str) -> dict:
    """The ``--json`` object: pooled constants and SEs, r2, per-wheel dicts, units, settings."""
    from planners.identify import UNITS

    pooled = fit.pooled.as_dict()
    return {
        **{k: pooled[k] for k in ("kS", "kV", "kA", "kS_se", "kV_se", "kA_se")},
        "r2": pooled["r2"],
        "n": pooled["n"],
        "ka_separable": pooled["ka_separable"],
        "wheels": {w: wf.fit.as_dict() for w, wf in fit.wheels.items()},
        "units": dict(UNITS),
        "log": source,
        "signal": fit.signal,
        "smoother": {"method": "savgol", "window_s": fit.smoother.window, "window_samples": fit.window_samples,
                     "order": fit.smoother.order, "dt_s": fit.dt},
        "dropped_samples": fit.dropped,
    }


def feedforward(args: argparse.Namespace) -> int:
    """Handler of ``identify --kind feedforward LOG.csv``."""
    from planners.identify import Smoother, fit_feedforward
    from planners.robot_log import read_log
    from sim.cli import SAFETY

    log = read_log(args.log)
    wheel = getattr(args, "wheel", None)
    smoother = Smoother(window=getattr(args, "window", 0.15), order=getattr(args, "order", 4))
    fit = fit_feedforward(log, smoother=smoother, wheels=(wheel,) if wheel else None)
    plot = None
    if not getattr(args, "no_plot", False):
        plot = Path(args.plot) if args.plot else Path(args.log).with_suffix(".residuals.png")
        _plot_residuals(fit, plot, f"feedforward fit residuals, {Path(args.log).name}")
    bad = [w for w, wf in fit.wheels.items() if not wf.fit.ka_separable]
    if not fit.pooled.ka_separable or bad:
        print(
            "skidpad identify: warning: kA is not separable"
            + (f" (wheels {', '.join(bad)})" if bad else " (pooled)")
            + ": its standard error is above 20 % of the estimate; the log has too little "
            "acceleration. Add a step test (duty steps) and fit again.",
            file=sys.stderr,
        )
    if args.json:
        print(json.dumps(feedforward_report(fit, args.log)))
        if plot:
            print(f"wrote {plot}", file=sys.stderr)
        print(SAFETY, file=sys.stderr)
        return 0
    print(f"feedforward u = kS sign(v) + kV v + kA a from {args.log} (wheel shaft speeds, {fit.signal} signal)")
    print(f"  Savitzky-Golay window {fit.smoother.window:g} s ({fit.window_samples} samples at "
          f"{fit.dt * 1e3:g} ms), order {fit.smoother.order}; {fit.dropped} samples dropped "
          "(standstill, voltage steps, ends)")
    for note in fit.notes:
        print(f"  note: {note}")
    header = f"  {'wheel':<8}{'kS [V]':>20}{'kV [V s/rad]':>24}{'kA [V s^2/rad]':>26}{'R^2':>10}{'n':>8}"
    print(header)
    rows = [(w, wf.fit) for w, wf in fit.wheels.items()]
    if len(rows) > 1:
        rows.append(("pooled", fit.pooled))
    for name, f in rows:
        cells = [f"{c:.5g} +- {s:.2g}" for c, s in zip(f.coef, f.se)]
        print(f"  {name:<8}{cells[0]:>20}{cells[1]:>24}{cells[2]:>26}{f.r2:>10.6f}{f.n:>8d}")
    print("  (+- one standard error; samples are treated as independent, so it is a lower bound)")
    if plot:
        print(f"wrote {plot}")
    print(SAFETY)
    return 0


#: --kind -> handler(args) -> exit code
KINDS: dict[str, Callable[[argparse.Namespace], int]] = {"feedforward": feedforward}
try:
    from sim.identify_odometry import KINDS as _more
except ModuleNotFoundError as exc:
    if exc.name != "sim.identify_odometry":
        raise
    _more = {}
KINDS.update(_more)


def run(args: argparse.Namespace) -> int:
    """Dispatch to the handler of ``--kind``."""
    return KINDS[args.kind](args)


def add_parser(sub: argparse._SubParsersAction) -> None:
    from sim.cli import SAFETY

    p = sub.add_parser(
        "identify",
        help="fit model constants from a robot log",
        description=(
            "Fit model constants from a robot log (the CSV format of planners/robot_log.py; "
            "`skidpad run SCENARIO --log LOG.csv` writes one). --kind feedforward fits "
            "u = kS sign(v) + kV v + kA a per wheel and pooled, with standard errors, R^2 and a "
            "residual plot (default: LOG.residuals.png beside the log); rehearse with "
            "scenarios/characterise-ramp-step-skid.toml or -mecanum.toml."
        ),
        epilog=SAFETY,
    )
    p.add_argument("log", help="robot log CSV (or, for some kinds, a run folder)")
    p.add_argument("--kind", required=True, choices=sorted(KINDS), help="what to identify")
    p.add_argument("--json", action="store_true", help="print the result as one JSON object")
    p.add_argument("--plot", metavar="FILE.png", help="where to write the residual plot")
    p.add_argument("--no-plot", action="store_true", help="skip the plot")
    p.add_argument("--wheel", metavar="LABEL", help="fit one wheel label only (left, right, fl, fr, rl, rr)")
    p.add_argument("--window", type=float, default=0.15, metavar="SECONDS",
                   help="feedforward: Savitzky-Golay window (default 0.15 s; longer on noisy encoders)")
    p.add_argument("--order", type=int, default=4, help="feedforward: Savitzky-Golay polynomial order (default 4)")
    p.set_defaults(handler=run)
