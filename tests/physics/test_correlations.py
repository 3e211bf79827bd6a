"""Convection correlations and their registry.

Sources:
- the general-purpose library ``ht`` (Caleb Bell, PyPI), called by its named
  functions (its dispatchers pick other methods for some inputs: in ht 1.2.0
  ``Nu_external_cylinder(..., Method='Churchill-Bernstein')`` returns another
  correlation's value);
- worked examples of Incropera et al., *Fundamentals of Heat and Mass Transfer*,
  6th ed., as quoted in ht's docstrings (Examples 7.3 and 9.2);
- the check values of the project's validation notes §3 (Table A.4 air at 300 K, D = 21 mm);
- the local flat-plate correlations of Incropera (Eqs. 7.23 and 7.36, from memory)
  integrated with ``scipy.integrate.quad`` for the mixed boundary layer;
- CoolProp (PyPI) for the air property table.
"""

import math

import ht
import pytest
from scipy.integrate import quad

from thermoelec.physics import correlations as corr
from thermoelec.physics.constants import STANDARD_GRAVITY

AIR_300K = {"nu": 15.89e-6, "k": 26.3e-3, "pr": 0.707}  # Incropera Table A.4 (validation notes §3)

# Functions of this package and ht agree to round-off: the same formula, evaluated in another
# order (ht writes (1 + (Pr/0.492)^-9/16)^-8/27 for the vertical plate, for one).
AGREE = 1e-12


# ---------------------------------------------------------------------------
# Worked examples
# ---------------------------------------------------------------------------

def test_published_worked_examples_quoted_by_ht():
    # Incropera Example 7.3 (Churchill-Bernstein) and Example 9.2 (Churchill-Chu, Pr = 0.69,
    # Gr = 2.63e9, so Ra = Gr Pr), as quoted in the docstrings of ht 1.2.0
    assert corr.nusselt_cylinder_churchill_bernstein(6071.0, 0.7) == pytest.approx(40.63709, rel=1e-6)
    assert corr.nusselt_horizontal_cylinder_churchill_chu(2.63e9 * 0.69, 0.69) == pytest.approx(139.1349, rel=1e-6)
    assert corr.nusselt_vertical_plate_churchill_chu(2.63e9 * 0.69, 0.69) == pytest.approx(147.1619, rel=1e-6)


@pytest.mark.parametrize("speed, reynolds, nusselt, h", [
    (0.5, 660.793, 12.9894, 16.2677), (1.0, 1321.59, 18.4182, 23.0666),
    (2.0, 2643.17, 26.2983, 32.9355), (5.0, 6607.93, 42.7044, 53.4821)])
def test_churchill_bernstein_worked_values(speed, reynolds, nusselt, h):
    # validation notes §3: D = 21 mm, Table A.4 air at 300 K; tabulated to 6 digits
    re = speed * 0.021 / AIR_300K["nu"]
    assert re == pytest.approx(reynolds, rel=5e-6)  # six significant digits
    assert corr.nusselt_cylinder_churchill_bernstein(re, AIR_300K["pr"]) == pytest.approx(nusselt, rel=1e-5)
    code = corr.FORCED_CORRELATIONS["cylinder_crossflow"]
    assert corr.convection_coefficient(code, 0, 0.021, speed, 300.0, 300.0) == pytest.approx(h, rel=1e-5)


def test_churchill_chu_horizontal_cylinder_worked_value():
    # validation notes §3: D = 21 mm, Ts = 310 K, T_inf = 290 K, beta = 1/300, g = 9.8
    gr = 9.8 * (1 / 300) * 20 * 0.021**3 / AIR_300K["nu"] ** 2
    assert gr == pytest.approx(23963.2, rel=1e-5)
    nu = corr.nusselt_horizontal_cylinder_churchill_chu(gr * AIR_300K["pr"], AIR_300K["pr"])
    assert nu == pytest.approx(4.96248, rel=1e-5)
    assert nu * AIR_300K["k"] / 0.021 == pytest.approx(6.21492, rel=1e-5)
    # the full chain at standard gravity against ht with the same properties
    gr_std = STANDARD_GRAVITY / 300 * 20 * 0.021**3 / AIR_300K["nu"] ** 2
    code = corr.NATURAL_CORRELATIONS["horizontal_cylinder"]
    h = corr.convection_coefficient(0, code, 0.021, 0.0, 310.0, 290.0)
    assert h == pytest.approx(ht.Nu_horizontal_cylinder_Churchill_Chu(0.707, gr_std) * 0.0263 / 0.021, rel=1e-6)


def test_mixed_flat_plate_worked_value_and_derivation():
    # Incropera Eq. 7.38 at Re = 1e6, Pr = 0.7, evaluated by hand
    expected = (0.037 * 63095.7344 - 871.0) * 0.887904
    assert corr.nusselt_flat_plate_mixed(1e6, 0.7) == pytest.approx(expected, rel=1e-6)
    # the same average from the local laminar (0.332 Re_x^1/2 Pr^1/3) and turbulent (0.0296 Re_x^4/5 Pr^1/3)
    # correlations, Nu_L = int_0^Re_L Nu_x / Re_x dRe_x with the transition at 5e5; Incropera rounds the
    # constant 871.32 to 871, which moves Nu_L by 2e-4 relative here, hence 1e-3
    pr, re_c, re_l = 0.7, corr.FLAT_PLATE_TRANSITION_REYNOLDS, 1e6
    laminar, _ = quad(lambda r: 0.332 * r**-0.5 * pr ** (1 / 3), 0.0, re_c)
    turbulent, _ = quad(lambda r: 0.0296 * r**-0.2 * pr ** (1 / 3), re_c, re_l)
    assert corr.nusselt_flat_plate_mixed(re_l, pr) == pytest.approx(laminar + turbulent, rel=1e-3)


def test_flat_plate_switches_at_the_transition():
    re_c = corr.FLAT_PLATE_TRANSITION_REYNOLDS
    assert corr.nusselt_flat_plate_parallel_flow(re_c, 0.7) == corr.nusselt_flat_plate_laminar(re_c, 0.7)
    above = math.nextafter(re_c, math.inf)
    assert corr.nusselt_flat_plate_parallel_flow(above, 0.7) == corr.nusselt_flat_plate_mixed(above, 0.7)
    # the rounded constant 871 leaves the two forms within 0.2 % of each other at the transition
    assert corr.nusselt_flat_plate_mixed(re_c, 0.7) == pytest.approx(
        corr.nusselt_flat_plate_laminar(re_c, 0.7), rel=2e-3)


def test_mixed_convection_closed_form():
    # Churchill (1977), n = 3: either part alone gives itself back; 3 and 4 give 91^(1/3)
    assert corr.mixed_convection_nusselt(5.0, 0.0) == pytest.approx(5.0, rel=1e-15)
    assert corr.mixed_convection_nusselt(0.0, 7.0) == pytest.approx(7.0, rel=1e-15)
    assert corr.mixed_convection_nusselt(3.0, 4.0) == pytest.approx(91.0 ** (1 / 3), rel=1e-15)


# ---------------------------------------------------------------------------
# Against ht's named functions
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("re", [1.0, 660.0, 6071.0, 1e5, 1e6])
@pytest.mark.parametrize("pr", [0.7, 7.0])
def test_churchill_bernstein_against_ht(re, pr):
    assert corr.nusselt_cylinder_churchill_bernstein(re, pr) == pytest.approx(
        ht.Nu_cylinder_Churchill_Bernstein(re, pr), rel=AGREE)


@pytest.mark.parametrize("re", [1e2, 1e4, 4.9e5])
@pytest.mark.parametrize("pr", [0.6, 0.707, 5.0])  # ht's Baehr form is 0.664 Re^1/2 Pr^1/3 for 0.05 <= Pr < 10
def test_laminar_flat_plate_against_ht(re, pr):
    assert corr.nusselt_flat_plate_laminar(re, pr) == pytest.approx(
        ht.Nu_horizontal_plate_laminar_Baehr(re, pr), rel=AGREE)
    assert corr.nusselt_flat_plate_parallel_flow(re, pr) == corr.nusselt_flat_plate_laminar(re, pr)


@pytest.mark.parametrize("pr, gr", [(0.707, 1e-2), (0.707, 1e3), (0.71, 3.3e6), (0.69, 2.63e9), (7.0, 1e11)])
def test_churchill_chu_against_ht(pr, gr):
    ra = pr * gr
    assert corr.nusselt_horizontal_cylinder_churchill_chu(ra, pr) == pytest.approx(
        ht.Nu_horizontal_cylinder_Churchill_Chu(pr, gr), rel=AGREE)
    assert corr.nusselt_vertical_plate_churchill_chu(ra, pr) == pytest.approx(
        ht.Nu_vertical_plate_Churchill(pr, gr), rel=AGREE)


# the other side only inside its range (1e5..1e10): beyond it ht switches to another form
@pytest.mark.parametrize("pr, gr, buoyant", [
    *[(pr, gr, True) for pr, gr in [(0.707, 2e4), (0.71, 3.3e6), (0.69, 2.6e9), (5.54, 3.21e8), (0.7, 1e11)]],
    *[(pr, gr, False) for pr, gr in [(0.707, 2e5), (0.71, 3.3e6), (0.69, 2.6e9), (5.54, 3.21e8), (0.7, 1.4e10)]]])
def test_mcadams_against_ht(pr, gr, buoyant):
    ra = pr * gr
    assert corr.nusselt_horizontal_plate_mcadams(ra, buoyant) == pytest.approx(
        ht.Nu_horizontal_plate_McAdams(pr, gr, buoyancy=buoyant), rel=AGREE)


def test_air_table_against_coolprop():
    coolprop = pytest.importorskip("CoolProp.CoolProp")
    for t in (250.0, 275.0, 300.0, 325.0, 350.0, 400.0):
        nu, k, pr = corr.air_properties(t)
        rho = coolprop.PropsSI("D", "T", t, "P", 101325, "Air")
        # two property sources differ by about 1 % (validation notes §3): the table's precision
        assert nu == pytest.approx(coolprop.PropsSI("V", "T", t, "P", 101325, "Air") / rho, rel=0.02)
        assert k == pytest.approx(coolprop.PropsSI("L", "T", t, "P", 101325, "Air"), rel=0.02)
        assert pr == pytest.approx(coolprop.PropsSI("Prandtl", "T", t, "P", 101325, "Air"), rel=0.02)


def test_convection_numbers_against_fluids():
    fluids = pytest.importorskip("fluids")
    # Ra = g beta dT L^3 / (nu alpha) = Gr Pr, beta = 1/T_film (ideal gas), properties at the film temperature
    re, ra, k, pr = corr.convection_numbers(0.15, 1.5, 330.0, 290.0)
    nu, k_table, pr_table = corr.air_properties(310.0)
    assert (k, pr) == (k_table, pr_table)
    assert re == pytest.approx(fluids.core.Reynolds(V=1.5, D=0.15, nu=nu), rel=AGREE)
    gr = fluids.core.Grashof(L=0.15, beta=1 / 310.0, T1=330.0, T2=290.0, nu=nu, g=STANDARD_GRAVITY)
    assert ra == pytest.approx(gr * pr, rel=AGREE)


# ---------------------------------------------------------------------------
# The registry
# ---------------------------------------------------------------------------

def test_registry_names_and_codes():
    assert all(name == entry.name for name, entry in corr.CORRELATIONS.items())
    for kind in ("forced", "natural"):
        codes = [c.code for c in corr.CORRELATIONS.values() if c.kind == kind]
        assert len(set(codes)) == len(codes), f"{kind} codes repeat: {codes}"
        assert 0 not in codes  # 0 is "none" in the kernels
    assert set(corr.FORCED_CORRELATION_NAMES).isdisjoint(corr.NATURAL_CORRELATION_NAMES)
    assert set(corr.FORCED_CORRELATION_NAMES) | set(corr.NATURAL_CORRELATION_NAMES) == set(corr.CORRELATIONS)
    # the codes are those the kernels had before the registry (a new entry takes a new code)
    assert {"cylinder_crossflow": 1, "flat_plate": 2}.items() <= corr.FORCED_CORRELATIONS.items()
    assert {"horizontal_cylinder": 1, "vertical_plate": 2, "horizontal_plate_up": 3,
            "horizontal_plate_down": 4}.items() <= corr.NATURAL_CORRELATIONS.items()


def test_registry_entries_document_themselves():
    for entry in corr.CORRELATIONS.values():
        assert entry.nusselt.__name__ in corr.__all__
        assert entry.nusselt.__name__.startswith("nusselt_")
        assert "References" in entry.nusselt.__doc__ and "Examples" in entry.nusselt.__doc__
        assert entry.reference and entry.method and entry.length
        assert all(rng.low < rng.high for rng in entry.validity)


def test_the_scenario_format_offers_exactly_the_registry_names():
    # every registry name is accepted under its kind, anything else is refused with the valid names listed
    from thermoelec.scenario.schema import ConvectionSpec

    for kind, names in (("forced", corr.FORCED_CORRELATION_NAMES), ("natural", corr.NATURAL_CORRELATION_NAMES)):
        for name in names:
            ConvectionSpec.model_validate({"area": 0.01, "length": 0.02, kind: name, **(
                {"air_speed": 1.0} if kind == "forced" else {})})
        with pytest.raises(ValueError, match=names[-1]):
            ConvectionSpec.model_validate({"area": 0.01, "length": 0.02, kind: "no_such_correlation"})


@pytest.mark.parametrize("name", list(corr.CORRELATIONS))
@pytest.mark.parametrize("surface_hot", [True, False])
def test_kernel_dispatch_follows_the_registry(name, surface_hot):
    # the kernels branch on codes; each code must evaluate its entry's function (length 1 m, k = 1 W/m/K: h = Nu)
    entry = corr.CORRELATIONS[name]
    number, pr = (2.0e4, 0.7) if entry.kind == "forced" else (3.0e6, 0.7)
    forced, natural = (entry.code, 0) if entry.kind == "forced" else (0, entry.code)
    re, ra = (number, 0.0) if entry.kind == "forced" else (0.0, number)
    h = corr.coefficient_from_numbers(forced, natural, 1.0, True, surface_hot, re, ra, 1.0, pr)
    assert h == entry.evaluate(number, pr, surface_hot)
    assert corr.nusselt_number(name, number, pr, surface_hot) == h


def test_horizontal_plates_take_the_buoyant_side():
    ra = 3.0e6
    buoyant, other = (corr.nusselt_horizontal_plate_mcadams(ra, side) for side in (True, False))
    assert buoyant == pytest.approx(0.54 * ra**0.25) and other == pytest.approx(0.27 * ra**0.25)
    up, down = corr.CORRELATIONS["horizontal_plate_up"], corr.CORRELATIONS["horizontal_plate_down"]
    assert up.evaluate(ra, 0.7, surface_hot=True) == buoyant == down.evaluate(ra, 0.7, surface_hot=False)
    assert up.evaluate(ra, 0.7, surface_hot=False) == other == down.evaluate(ra, 0.7, surface_hot=True)


def test_mixed_convection_in_the_dispatch():
    re, ra, pr = 2.0e4, 3.0e6, 0.7
    forced, natural = corr.FORCED_CORRELATIONS["flat_plate"], corr.NATURAL_CORRELATIONS["vertical_plate"]
    h = corr.coefficient_from_numbers(forced, natural, 1.0, True, True, re, ra, 1.0, pr)
    assert h == pytest.approx(corr.mixed_convection_nusselt(corr.nusselt_flat_plate_parallel_flow(re, pr),
                                                            corr.nusselt_vertical_plate_churchill_chu(ra, pr)))
    # no air flow: the forced part contributes nothing
    still = corr.coefficient_from_numbers(forced, natural, 1.0, False, True, re, ra, 1.0, pr)
    assert still == corr.nusselt_vertical_plate_churchill_chu(ra, pr)


def test_unknown_name_lists_the_valid_ones():
    with pytest.raises(ValueError, match="unknown convection correlation 'no_such_correlation'") as error:
        corr.correlation("no_such_correlation")
    for name in corr.CORRELATIONS:
        assert name in str(error.value)
    with pytest.raises(ValueError, match="unknown forced convection correlation 'vertical_plate'") as error:
        corr.correlation("vertical_plate", "forced")
    assert all(name in str(error.value) for name in corr.FORCED_CORRELATION_NAMES)
    assert not any(name in str(error.value).split("valid: ")[1] for name in corr.NATURAL_CORRELATION_NAMES)
    with pytest.raises(ValueError, match="valid: cylinder_crossflow"):
        corr.nusselt_number("cylinder", 1e4, 0.7)


@pytest.mark.parametrize("kwargs, expected", [
    # Incropera's ranges (from memory): Churchill-Bernstein Re Pr >= 0.2; flat plate Re <= 1e8, 0.6 <= Pr <= 60
    ({"prandtl": 0.7, "reynolds": 1e4}, ["cylinder_crossflow", "flat_plate"]),
    ({"prandtl": 0.7, "reynolds": 0.1}, ["flat_plate"]),
    ({"prandtl": 0.7, "reynolds": 2e8}, ["cylinder_crossflow"]),
    ({"prandtl": 0.02, "reynolds": 1e4}, ["cylinder_crossflow"]),
    # McAdams: buoyant side 1e4..1e11, other side 1e5..1e10; Churchill-Chu cylinder Ra <= 1e12, plate all Ra
    ({"prandtl": 0.7, "rayleigh": 5e4}, ["horizontal_cylinder", "vertical_plate", "horizontal_plate_up"]),
    ({"prandtl": 0.7, "rayleigh": 5e4, "surface_hot": False},
     ["horizontal_cylinder", "vertical_plate", "horizontal_plate_down"]),
    ({"prandtl": 0.7, "rayleigh": 1e6}, ["horizontal_cylinder", "vertical_plate", "horizontal_plate_up",
                                         "horizontal_plate_down"]),
    ({"prandtl": 0.7, "rayleigh": 1e13}, ["vertical_plate"]),
    ({"prandtl": 0.7}, []),
])
def test_valid_correlations(kwargs, expected):
    assert corr.valid_correlations(**kwargs) == expected


def test_validity_ranges_read_as_inequalities():
    ranges = {name: [rng.describe() for rng in entry.validity] for name, entry in corr.CORRELATIONS.items()}
    assert ranges["cylinder_crossflow"] == ["0.2 <= Re Pr"]
    assert ranges["flat_plate"] == ["Re <= 1e+08", "0.6 <= Pr <= 60"]
    assert ranges["horizontal_plate_up"] == ["1e+04 <= Ra <= 1e+11", "1e+05 <= Ra <= 1e+10"]
    assert ranges["vertical_plate"] == []
