"""Write ``cargo_robot_route.csv``: one hour of a last-mile cargo robot's pack power at 1 Hz (invented).

Stop-and-go between drop-offs: pull away (two seconds at 2.2 kW), cruise at 750 to
1050 W with noise, brake with regeneration, wait at the door on the robot's
electronics (40 W); two ramps of a minute at 1.9 kW and one descent regenerating.
Seeded, so the file is the same every time: ``python make_cargo_robot_route.py``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

SECONDS = 3600
OUT = Path(__file__).with_name("cargo_robot_route.csv")


def route(seed: int = 12) -> np.ndarray:
    """Pack power [W] for each second of the hour (> 0 drives, < 0 regenerates)."""
    rng = np.random.default_rng(seed)
    power = np.empty(0)
    while power.size < SECONDS:
        cruise = rng.uniform(750.0, 1050.0)
        leg = int(rng.uniform(60, 200))
        drive = cruise + rng.normal(0.0, 60.0, leg)
        drive[:2] = 2200.0  # pulling away, loaded
        brake = np.linspace(-450.0, -50.0, 6)
        wait = np.full(int(rng.uniform(20, 90)), 40.0)
        power = np.concatenate([power, drive, brake, wait])
    power = power[:SECONDS]
    power[900:960] = 1900.0 + rng.normal(0.0, 40.0, 60)  # the ramp up to the first yard
    power[2400:2460] = 1900.0 + rng.normal(0.0, 40.0, 60)  # and to the second
    power[3000:3090] = -300.0 + rng.normal(0.0, 20.0, 90)  # the long descent back to the depot
    return np.round(power, 1)


def main() -> None:
    lines = ["# last-mile cargo robot, one hour at 1 Hz: pack power (negative = regeneration); invented",
             "time_s,power_W"]
    lines += [f"{t},{p:.1f}" for t, p in enumerate(route())]
    lines.append(f"{SECONDS},{0.0:.1f}")
    OUT.write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
