# thermoelec: `make demo` runs the example missions, `make test` runs the tests.
# Both first install what is missing: Debian's libsundials-dev, a .venv, the package.

PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.thermoelec-installed
DEMO   := out/demo
LOGS   := scenarios/logs

.PHONY: all setup kernels test test-all demo lint bench bench-quick clean

all: test

$(STAMP): pyproject.toml
	@tools/ensure-sundials
	@tools/ensure-chromium
	@test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	@$(BIN)/python -m pip install -q --disable-pip-version-check --upgrade pip
	@echo "thermoelec set-up: installing the package and its dependencies into $(VENV)"
	@$(BIN)/python -m pip install -q --disable-pip-version-check -e '.[dev]'
	@touch $(STAMP)

# The kernels run and sweep call, compiled ahead of time (thermoelec/engine/ahead.py): a no-op when today's build
# is there; should it fail, everything still runs through numba's cache, only slower to start.
kernels: $(STAMP)
	@$(BIN)/python -m thermoelec.engine.ahead || true

setup: $(STAMP) kernels

test: $(STAMP) kernels
	$(BIN)/python -m pytest -q -m "not slow"

test-all: $(STAMP) kernels
	$(BIN)/python -m pytest -q

lint: $(STAMP)
	$(BIN)/ruff check thermoelec tests benchmarks

demo: $(STAMP) kernels
	@echo "== courier drone sortie, hot afternoon (38 degC)"
	@$(BIN)/thermoelec run scenarios/drone_delivery.toml --out $(DEMO)/drone-hot
	@echo
	@echo "== the sortie compared: hot afternoon against cold morning (-5 degC)"
	@$(BIN)/thermoelec compare scenarios/drone_delivery.toml --out $(DEMO)/drone-compare
	@echo
	@echo "== the sortie swept: ambient -10..40 degC x housing convection 10..50 W/m^2/K"
	@$(BIN)/thermoelec sweep scenarios/drone_delivery.toml --out $(DEMO)/drone-sweep
	@echo
	@echo "== the least housing convection that keeps the cells at or below 55 degC, per ambient"
	@$(BIN)/thermoelec sweep scenarios/drone_delivery.toml --out $(DEMO)/drone-search \
		--sweep "thermal.ambient_temperature=20 degC,30 degC,38 degC,45 degC" \
		--find "cell_temperature_max_degC <= 55" --over thermal.convection.coefficient \
		--between "5 W/m^2/K" "200 W/m^2/K"
	@echo
	@echo "== the sortie's pulse capability: the most power and current for 2, 10 and 30 s, over SoC x temperature"
	@$(BIN)/thermoelec capability scenarios/drone_delivery.toml --out $(DEMO)/drone-capability
	@echo
	@echo "== the sortie at -5 degC under the pack's BMS: derated in the cold, held at its minimum voltage near empty"
	@$(BIN)/thermoelec compare scenarios/drone_cold_bms.toml --out $(DEMO)/drone-cold-bms
	@echo
	@echo "== cargo e-bike round from a 1 Hz CSV, then a CC-CV recharge"
	@$(BIN)/thermoelec run scenarios/ebike_route.toml --out $(DEMO)/ebike
	@echo
	@echo "== the e-bike round compared: summer against a winter morning"
	@$(BIN)/thermoelec compare scenarios/ebike_route.toml --out $(DEMO)/ebike-compare
	@echo
	@echo "== a warehouse robot shift: still air, a fan, a cold plate, and a freezer aisle with a heater"
	@$(BIN)/thermoelec compare scenarios/robot_cooling.toml --out $(DEMO)/robot-cooling
	@echo
	@echo "== a sidewalk delivery robot: four battery-bay cooling options x ambient x route, and the cheapest that"
	@echo "   passes at 45 degC with 2 K of margin on every route (the design review)"
	@$(BIN)/thermoelec sweep scenarios/delivery_robot_options.toml --out $(DEMO)/robot-options
	@echo "== a cargo robot's 14s4p pack, every cell resolved on a cold plate (coolant along the rows):"
	@echo "   the hottest cell against the lumped estimate, and one cell 5 % short of capacity"
	@$(BIN)/thermoelec run scenarios/cargo_robot_pack.toml --out $(DEMO)/cargo-robot-pack
	@$(BIN)/thermoelec compare scenarios/cargo_robot_pack.toml --out $(DEMO)/cargo-robot-pack-compare
	@echo
	@echo "== the demo scooter cell fitted from its (invented) lab logs: OCV, pulses, heater test"
	@$(BIN)/thermoelec fit ocv $(LOGS)/scooter_c20_discharge.csv $(LOGS)/scooter_c20_charge.csv \
		--out $(DEMO)/fit/scooter_cell_ocv.toml
	@$(BIN)/thermoelec fit pulse $(LOGS)/scooter_hppc_5C.csv $(LOGS)/scooter_hppc_25C.csv \
		$(LOGS)/scooter_hppc_40C.csv --cell $(DEMO)/fit/scooter_cell_ocv.toml --out $(DEMO)/fit/scooter_cell_pulse.toml \
		--quiet
	@$(BIN)/thermoelec fit thermal $(LOGS)/scooter_heater_test.csv --cell $(DEMO)/fit/scooter_cell_pulse.toml \
		--mass "68 g" --out $(DEMO)/fit/scooter_cell.toml
	@echo
	@echo "== a courier e-scooter run on the fitted cell (scenarios/cells/scooter_cell.toml), cool and hot"
	@$(BIN)/thermoelec compare scenarios/scooter_commute.toml --out $(DEMO)/scooter-compare
	@echo
	@echo "open $(DEMO)/*/report.html, $(DEMO)/robot-options/design_report.html and $(DEMO)/fit/*_report.html in a"
	@echo "browser for the figures and the verdicts"

bench: $(STAMP) kernels
	$(BIN)/python benchmarks/bench_single_mission.py
	$(BIN)/python benchmarks/bench_sweep.py
	$(BIN)/python benchmarks/bench_sweep_scale.py
	$(BIN)/python benchmarks/bench_sweep_figures.py
	$(BIN)/python benchmarks/bench_end_to_end.py
	$(BIN)/python benchmarks/bench_uncertainty.py
	$(BIN)/python benchmarks/bench_options.py
	$(BIN)/python benchmarks/bench_pack.py
	$(BIN)/python benchmarks/bench_capability.py
	$(BIN)/python benchmarks/bench_fixed_cost.py
	$(BIN)/python benchmarks/bench_two_cores.py

bench-quick: $(STAMP) kernels
	$(BIN)/python benchmarks/bench_single_mission.py --quick
	$(BIN)/python benchmarks/bench_sweep.py --quick
	$(BIN)/python benchmarks/bench_sweep_scale.py --quick
	$(BIN)/python benchmarks/bench_sweep_figures.py --quick
	$(BIN)/python benchmarks/bench_end_to_end.py --quick
	$(BIN)/python benchmarks/bench_uncertainty.py --quick
	$(BIN)/python benchmarks/bench_options.py --quick
	$(BIN)/python benchmarks/bench_pack.py --quick
	$(BIN)/python benchmarks/bench_capability.py --quick
	$(BIN)/python benchmarks/bench_fixed_cost.py --quick
	$(BIN)/python benchmarks/bench_two_cores.py --quick

clean:
	rm -rf $(VENV) out .pytest_cache .ruff_cache
	find thermoelec tests benchmarks -name __pycache__ -type d -prune -exec rm -rf {} +
