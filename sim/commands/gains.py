"""``skidpad gains SCENARIO``: wheel, tracker and heading-filter gains from the scenario's constants."""

from __future__ import annotations

import argparse
import math
from pathlib import Path

from sim.commands import add_set_option


def add_parser(sub: argparse._SubParsersAction) -> None:
    from sim.cli import SAFETY

    p = sub.add_parser(
        "gains",
        help="work out wheel, tracker and heading-filter gains; write a TOML fragment",
        description=(
            "From the scenario's own constants: wheel feedforward kS, kV, kA (--constants FILE.json "
            "from `skidpad identify --kind feedforward --json`, else [control], else the motor "
            "datasheet), wheel-speed kP (discrete LQR, Bryson's weights) and kI (SIMC), the "
            "unicycle and holonomic tracker gains for a natural frequency and damping, and the "
            "steady-state gain and heading sigma of the kalman estimator from the IMU's noise "
            "figures. Prints them and a [control]/[tracker]/[estimator] fragment to paste into a "
            "scenario (--out writes it to a file). " + SAFETY
        ),
        epilog=SAFETY,
    )
    p.add_argument("scenario", nargs="?", help="scenario TOML file (default: the bundled workshop loop)")
    p.add_argument("--out", metavar="FILE.toml", help="write the fragment to this file")
    p.add_argument("--constants", metavar="FILE.json",
                   help="wheel feedforward kS, kV, kA from this file (what `skidpad identify --kind "
                        "feedforward --json` prints), in place of the scenario's [control] values")
    p.add_argument("--bandwidth", metavar="HZ-or-1/s",
                   help="tracker natural frequency: a number in 1/s (rad/s) or e.g. '0.6 Hz' "
                        "(= 2 pi 0.6 rad/s); default: the holonomic tracker's default bandwidth")
    p.add_argument("--damping", type=float, metavar="Z",
                   help="unicycle damping zeta in (0, 1) (default: the tracker's default)")
    p.add_argument("--speed", metavar="SPEED",
                   help="unicycle design speed, e.g. '0.8 m/s' (default: route.max_speed)")
    add_set_option(p)
    p.set_defaults(handler=run)


def _vec(v) -> str:
    return "[" + ", ".join(f"{x:.4g}" for x in v) + "]"


def run(args: argparse.Namespace) -> int:
    from planners.trackers import TRACKERS
    from sim.cli import SAFETY
    from sim.gains import bryson_weights, fragment_text, parse_bandwidth, read_constants, scenario_gains
    from sim.scenario import default_scenario_path, load_scenario
    from sim.units import to_si

    path = args.scenario or str(default_scenario_path())
    bandwidth = None if args.bandwidth is None else parse_bandwidth(args.bandwidth)
    speed = None if args.speed is None else to_si(args.speed, "speed", where="--speed")
    overrides, given_as, notes = list(args.overrides), "[control]", []
    if args.constants:
        constants, notes = read_constants(args.constants)
        overrides += [f"control.{k}={v!r}" for k, v in constants.items()]
        given_as = f"identified, {Path(args.constants).name}"
    sc = load_scenario(path, overrides)
    g = scenario_gains(sc, bandwidth=bandwidth, damping=args.damping, speed=speed, given_as=given_as)
    g.notes.extend(notes)
    w, v = g.wheel, g.wheel.values
    print(f"{sc.title}: {sc.robot.wheel_count} wheels, control at {1 / g.dt:g} Hz")
    units = {"kS": "V", "kV": "V s/rad", "kA": "V s^2/rad"}
    sources = {w.source[k] for k in units}
    one = len(sources) == 1
    ff = ", ".join(f"{k} {v[k]:.4g} {u}" + ("" if one else f" ({w.source[k]})") for k, u in units.items())
    print("  feedforward" + (f" ({sources.pop()})" if one else "") + f": {ff} "
          f"(time constant kA/kV {1e3 * w.tau_plant:.3g} ms)")
    q, r = bryson_weights(w)
    how = (f"Bryson's weights Q = 1/({w.max_error:.4g} rad/s)^2 = {q:.3g}, "
           f"R = 1/({w.max_effort:.4g} V)^2 = {r:.3g}" if w.source["kP"] == "discrete LQR" else "given")
    print(f"  wheel-speed loop: kP {v['kP']:.4g} V s/rad ({w.source['kP']}; {how}); "
          f"closed-loop time constant {1e3 * w.tau_closed:.3g} ms")
    print(f"                    kI {v['kI']:.4g} V/rad ({w.source['kI']}"
          + ("; tau_I = min(kA/kV, 4 tau_c))" if w.source["kI"] == "SIMC" else ")"))
    print(f"  trackers at natural frequency {g.bandwidth:.4g} rad/s ({g.bandwidth / (2 * math.pi):.3g} Hz):")
    u, h = g.unicycle, g.holonomic
    holonomic_chassis = TRACKERS.get("holonomic").CHASSIS
    print(f"    unicycle:  zeta = {u['zeta']:g}, b = {u['b']:.4g} 1/m^2  (a = sqrt(w_d^2 + b v_d^2) = "
          f"{g.bandwidth:.3g} rad/s at the design speed {g.design_speed:g} m/s, straight; "
          f"{g.bandwidth / 2:.3g} rad/s at half that speed)")
    print(f"    holonomic: bandwidth = {h['bandwidth']:.4g}, heading_bandwidth = {h['heading_bandwidth']:.4g} "
          "1/s  (each field axis e' = -k e; no damping to set"
          + (")" if sc.robot.chassis in holonomic_chassis
             else f"; drives only {', '.join(holonomic_chassis)}, not this {sc.robot.chassis} chassis)"))
    if g.gyro_sigma is not None:
        imu = sc.sensors.imu
        print(f"  heading Kalman filter: gyro sigma per sample {g.gyro_sigma:.3g} rad/s "
              f"(rate_noise / sqrt(sample period)), bias walk {imu.bias_walk:.3g} rad/s/sqrt(s)")
    for d in g.heading:
        before, after = d.every_tick.heading_sigma
        print(f"    {d.measure} heading (sigma {math.degrees(d.sigma):.3g} deg) every tick: "
              f"K = {_vec(d.every_tick.gain[:, 0])}, heading sigma {math.degrees(before):.3g} deg "
              f"predicted, {math.degrees(after):.3g} deg updated")
        if d.at_rate is not None:
            before, after = d.at_rate.heading_sigma
            print(f"    {d.measure} heading every {d.every} ticks: K = {_vec(d.at_rate.gain[:, 0])}, "
                  f"heading sigma {math.degrees(before):.3g} deg before a fix, "
                  f"{math.degrees(after):.3g} deg after")
    for note in g.notes:
        print(f"  note: {note}")
    text = fragment_text(g, SAFETY)
    if args.out:
        out = Path(args.out)
        out.parent.mkdir(parents=True, exist_ok=True)
        out.write_text(text)
        print(f"wrote {out}")
    else:
        print()
        print(text, end="")
    print(SAFETY)
    return 0
