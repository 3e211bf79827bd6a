"""Make the invented test logs of the demo scooter cell (run from the project root).

    .venv/bin/python scenarios/logs/make_demo_logs.py

Synthesizes with the engine, from the parameters below, what a cell-test lab
would log: a C/20 discharge and charge at 25 degC, pulse tests at 5, 25 and
40 degC (from 90 % to about 13 % SoC, inside the cell's 2.5..4.2 V limits), and a
heater test in still air; recorded like a cycler (1 mV, 10 mA, 0.05 K). The
cell and its numbers are invented for the demo.
"""

from pathlib import Path

import numpy as np

import thermoelec
from thermoelec.fit import synthesize
from thermoelec.physics.cell import GAS_CONSTANT

HERE = Path(__file__).resolve().parent
SOC = [0.05, 0.2, 0.35, 0.5, 0.65, 0.8, 0.95]
TEMPS = [5.0, 25.0, 40.0]


def table(base, ea):
    return [[round(base(z) * float(np.exp(ea / GAS_CONSTANT * (1 / (t + 273.15) - 1 / 298.15))), 6) for z in SOC]
            for t in TEMPS]


CELL = {
    "capacity": "4.2 Ah", "voltage_max": "4.2 V", "voltage_min": "2.5 V", "mass": "0.068 kg",
    "specific_heat": "980 J/kg/K", "initial_soc": 1.0,
    "ocv": {"soc": [0.0, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0],
            "voltage": [3.05, 3.28, 3.42, 3.53, 3.6, 3.65, 3.7, 3.77, 3.86, 3.96, 4.07, 4.19]},
    "r0": {"soc": SOC, "temperature": [f"{t} degC" for t in TEMPS],
           "values": table(lambda z: 0.016 + 0.009 * (1 - z) ** 3, 28e3)},
    "rc": [{"resistance": {"soc": SOC, "temperature": [f"{t} degC" for t in TEMPS],
                           "values": table(lambda z: 0.007 + 0.003 * (1 - z) ** 2, 22e3)},
            "time_constant": "25 s"}],
}


def run(segments, ambient, soc=1.0, thermal=None):
    data = {"format": 1, "scenario": {"name": "demo test rig"}, "cell": {**CELL, "initial_soc": soc},
            "thermal": thermal or {"ambient_temperature": f"{ambient} degC", "sink_heat_capacity": "1e5 J/K",
                                   "cell_to_sink": "1e3 W/K", "sink_to_ambient": "1e3 W/K"},
            "profile": {"segment": segments}, "limits": {"charge_temperature_min": "-40 degC"},
            "solver": {"rtol": 1e-8, "output_interval": "1 s"}}
    return thermoelec.simulate(data)


def main() -> None:
    rng = np.random.default_rng(2026)
    discharge, charge = synthesize.ocv_test_segments(4.2)
    slow = synthesize.Recorder(interval=30.0)
    # the slow tests end on the SoC limit (empty, full), well inside the voltage limits at C/20
    synthesize.record(run(discharge, 25.0), slow, rng).to_csv(HERE / "scooter_c20_discharge.csv", index=False)
    synthesize.record(run(charge, 25.0, soc=0.0), slow, rng).to_csv(HERE / "scooter_c20_charge.csv", index=False)
    for t in TEMPS:
        # from 90 % SoC down to about 13 %, charge pulses at 0.5C: at 5 degC a 1.5C charge pulse near full would
        # take the cell past its 4.2 V limit, which a lab's procedure never does
        segments = synthesize.hppc_segments(4.2, charge_c=0.5, relax=240.0, step_rest=600.0, span=0.65)
        result = run(segments, t, soc=0.9)
        assert result.completed, f"the {t:g} degC pulse test stopped: {result.summary['stop_explanation']}"
        synthesize.record(result, synthesize.Recorder(), rng).to_csv(HERE / f"scooter_hppc_{t:g}C.csv", index=False)
    heater = {"ambient_temperature": "22 degC", "sink_heat_capacity": "1e6 J/K", "cell_to_sink": "0 W/K",
              "sink_to_ambient": "1 W/K", "cell_to_ambient": "0.07 W/K",
              "heater": {"power": "5 W", "on_below": "26 degC", "off_above": "46 degC"}}
    result = run([{"mode": "rest", "duration": "3 h"}], 22.0, thermal=heater)
    synthesize.record(result, synthesize.Recorder(interval=5.0), rng, heater_power=True).to_csv(
        HERE / "scooter_heater_test.csv", index=False)


if __name__ == "__main__":
    main()
