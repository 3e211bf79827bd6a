"""The commented template scenario that ``thermoelec new FILE`` writes: a valid start for a scenario of one's own.

Owns :data:`TEMPLATE`. Every required key is there with an invented, plausible
value and its unit; the optional keys most scenarios want are there too, the
others are named in comments. The tests check that it validates and runs.
"""

from __future__ import annotations

__all__ = ["TEMPLATE"]

TEMPLATE = '''\
# A thermoelec scenario (format 1). Quantities are a bare number in the key's unit
# (in brackets below) or a string with its own unit: "5 Ah", "12 mohm", "-20 degC".
# Check it without running it:   thermoelec check THIS_FILE
# Run it:                        thermoelec run THIS_FILE --out out/my-run
# The values below are invented placeholders: put your cell's and your mission's.
format = 1

[scenario]
name = "my mission"                # shown in outputs
description = "What the pack must get through, and in which conditions."

[cell]                             # one cell
capacity = "5 Ah"                  # [Ah]
voltage_max = "4.2 V"              # [V] terminal voltage limits of each cell
voltage_min = "3.0 V"              # [V]
mass = "0.070 kg"                  # [kg]
specific_heat = "950 J/kg/K"       # [J/(kg K)]
initial_soc = 1.0                  # [-] default 1.0
# diameter = "21 mm"; length = "70 mm"; thermal_conductivity = "0.6 W/m/K"   # enables the Biot check

[cell.ocv]                         # open-circuit voltage at the reference temperature
soc     = [0.0,  0.1,  0.2,  0.3,  0.4,  0.5,  0.6,  0.7,  0.8,  0.9,  1.0]   # from 0 to 1, increasing
voltage = [3.00, 3.38, 3.50, 3.58, 3.63, 3.68, 3.75, 3.84, 3.94, 4.06, 4.20]  # [V]
# entropic = [...]                 # [V/K] dU/dT, same length; default 0
# reference_temperature = "25 degC"

[cell.r0]                          # series resistance: a constant, a table over SoC, or SoC x temperature
value = "15 mohm"                  # [ohm]
activation_energy = "25 kJ/mol"    # [J/mol] optional Arrhenius factor; default none
# soc = [0.0, 0.5, 1.0]; temperature = ["0 degC", "25 degC"]; values = [[...], [...]]   # a 2-D table instead

[[cell.rc]]                        # zero or more RC pairs
resistance = "8 mohm"              # [ohm]
time_constant = "25 s"             # [s], or capacitance = "3000 F"

[pack]
series = 4                         # cells in series; default 1
parallel = 2                       # cells in parallel; default 1
interconnect_resistance = "5 mohm" # [ohm] total; its heat goes to the sink node; default 0

[thermal]                          # whole pack
ambient_temperature = "25 degC"    # [degC]
# initial_cell_temperature = "25 degC"   # default: the ambient at t = 0
sink_heat_capacity = "300 J/K"     # [J/K] housing or heat sink
cell_to_sink = "2 W/K"             # [W/K]
sink_to_ambient = "1 W/K"          # [W/K], or a [thermal.convection] table
# cell_to_ambient = "0 W/K"        # [W/K] a direct path; default 0
# [thermal.fan], [thermal.heater], [thermal.coolant], [thermal.pump], [thermal.radiation]: see the README

[profile]
repeat = 1                         # the segment list runs this many times

[[profile.segment]]
name = "accelerate"                # optional: shown on the dashboard and in events
mode = "power"                     # current | power | resistance | voltage | rest | cccv | soak
value = "120 W"                    # [A] | [W] | [ohm] | [V] at the pack; > 0 discharges, < 0 charges
duration = "30 s"                  # [s]

[[profile.segment]]
name = "cruise"
mode = "power"
value = "60 W"
duration = "10 min"
# voltage_below = "12.5 V"         # optional end conditions: voltage_below / voltage_above [V],
#                                  # soc_below / soc_above [-]

[[profile.segment]]
name = "park"
mode = "rest"
duration = "5 min"

[[profile.segment]]
name = "recharge"
mode = "cccv"                      # constant current to the voltage, then constant voltage to the cutoff
current = "-2.5 A"                 # [A] negative: charging
voltage = "16.8 V"                 # [V] pack voltage held in the CV phase
cutoff_current = "0.25 A"          # [A]
duration = "3 h"                   # [s] optional cap

# [[profile.segment]]
# file = "profiles/route.csv"      # or a measured series: time_s and one of current_A, power_W,
#                                  # resistance_ohm, voltage_V (optional ambient_temperature_degC)

[limits]
cell_temperature_max = "60 degC"   # [degC] exceeding it ends the run; default 60 degC
charge_temperature_min = "0 degC"  # [degC] charging below it fails the verdict; default 0 degC

[solver]
output_interval = "1 s"            # [s] spacing of the reported series; default 1 s

# [sweep]                          # thermoelec sweep: every combination of these
# "thermal.ambient_temperature" = ["-10 degC", "25 degC", "40 degC"]

[[case]]                           # thermoelec compare: named variants
name = "mild"
"thermal.ambient_temperature" = "25 degC"

[[case]]
name = "cold"
"thermal.ambient_temperature" = "-10 degC"
'''
