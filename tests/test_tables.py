"""Reference tables against the standards and supplier ranges they come from, and the demo
catalogs against the tables."""
from __future__ import annotations

import numpy as np
import pytest

from optimiser import tables
from optimiser.catalogs import load_catalogs

# --- ASTM B258: AWG diameters ----------------------------------------------------------------
# Tabulated nominal diameters of ASTM B258 (values also in MODEL.md, checked there). The table
# prints 4 significant figures, so a formula value may differ by half a unit in the last place.
ASTM_B258_DIAMETER_MM = {10: 2.588, 14: 1.628, 18: 1.024, 22: 0.644}


@pytest.mark.parametrize("gauge, diameter_mm", ASTM_B258_DIAMETER_MM.items())
def test_awg_diameter_ASTM_B258_table(gauge, diameter_mm):
    assert tables.awg_diameter_m(gauge) * 1e3 == pytest.approx(diameter_mm, abs=0.0005)


# IEC 60028 international annealed copper standard: rho_20 = 1/58 ohm mm^2/m. Resistance per km at
# 20 C of the AWG sizes as tabulated in AWG wire tables (values in MODEL.md, checked there). The 0.5 %
# tolerance covers the tables' 4-figure rounding and the tables' rho (1/58.0 vs 0.017241 ohm mm^2/m).
RHO_20_OHM_MM2_PER_M = 1 / 58
AWG_RESISTANCE_OHM_PER_KM = {10: 3.277, 14: 8.286, 18: 20.95, 22: 52.96}


@pytest.mark.parametrize("gauge, ohm_per_km", AWG_RESISTANCE_OHM_PER_KM.items())
def test_awg_resistance_per_km_IEC_60028(gauge, ohm_per_km):
    area_mm2 = np.pi / 4 * (tables.awg_diameter_m(gauge) * 1e3) ** 2
    assert RHO_20_OHM_MM2_PER_M / area_mm2 * 1e3 == pytest.approx(ohm_per_km, rel=0.005)


def test_awg_diameter_scalar_array_and_batch():
    # invariant of the gauge: every 6 gauges the diameter halves (92^(6/39) = 2.006, ASTM B258)
    assert np.ndim(tables.awg_diameter_m(18)) == 0
    g = np.arange(-3, 41)
    d = tables.awg_diameter_m(g)
    assert d.shape == g.shape and np.all(np.diff(d) < 0)
    assert d[:-6] / d[6:] == pytest.approx(92 ** (6 / 39))
    batch = np.random.default_rng(1).integers(-3, 41, size=5000)
    assert np.array_equal(tables.awg_diameter_m(batch), d[batch + 3])
    assert all(tables.nearest_awg(tables.awg_diameter_m(n)) == (n, pytest.approx(0, abs=1e-12))
               for n in g)


# --- IEC 60317-0-1: enamel build ---------------------------------------------------------------
def test_enamel_grade_maximum_diameter_IEC_60317_example():
    # MODEL.md example, 1.016 mm wire: grade 1 max 1.080 mm, grade 2 max 1.113 mm (from memory of
    # IEC 60317-0-1; our anchors are from memory too, so two recollections agreeing to 1 %)
    assert tables.enamel_max_overall_diameter_m(1.016e-3, 1) * 1e3 == pytest.approx(1.080, rel=0.01)
    assert tables.enamel_max_overall_diameter_m(1.016e-3, 2) * 1e3 == pytest.approx(1.113, rel=0.01)


def test_enamel_build_grows_with_grade_and_diameter():
    d = np.geomspace(0.05e-3, 6e-3, 2000)
    over = np.array([tables.enamel_max_overall_diameter_m(d, g) for g in (1, 2, 3)])
    increment = over - d
    assert np.all(increment > 0) and np.all(np.diff(increment, axis=0) > 0)
    assert np.all(np.diff(increment, axis=1) > 0)
    assert np.all(increment < 0.3e-3)  # the loader's plausibility limit for an overall diameter
    assert np.ndim(tables.enamel_max_overall_diameter_m(1e-3, 2)) == 0


# --- NdFeB grades ---------------------------------------------------------------------------------
# Typical supplier datasheet ranges, as summarised in MODEL.md (from memory of supplier tables;
# IEC 60404-8-1 gives only minima): N35 1.17-1.22 T, N42 1.28-1.32 T, N52 1.42-1.48 T; max working
# temperature: none 80 C, M 100, H 120, SH 150, UH 180, EH 200.
MODEL_MD_BR_T = {35: (1.17, 1.22), 42: (1.28, 1.32), 52: (1.42, 1.48)}
MODEL_MD_MAX_TEMP_C = {"": 80, "M": 100, "H": 120, "SH": 150, "UH": 180, "EH": 200}


def test_grade_table_matches_supplier_ranges_in_model_md():
    for number, rng in MODEL_MD_BR_T.items():
        assert tables.BR_RANGE_T[number] == rng
    assert tables.SUFFIX_MAX_TEMP_C == MODEL_MD_MAX_TEMP_C
    numbers = sorted(tables.BR_RANGE_T)
    lows = [tables.BR_RANGE_T[n][0] for n in numbers]
    assert np.all(np.diff(lows) > 0)                       # higher grade, higher Br
    for n in numbers:
        lo, hi = tables.BR_RANGE_T[n]
        assert 0.2 < lo < hi < 1.6
        # The grade number is the energy product (BH)max in MGOe (1 MGOe = 7957.75 J/m^3). A
        # straight recoil line with mu_r = 1 gives (BH)max = Br^2 / (4 mu0) (textbook ideal-magnet
        # bound, e.g. Coey, Magnetism and Magnetic Materials, 2010; from memory), so the top of the
        # Br range must reach sqrt(4 mu0 (BH)max); 1 % for the 4-figure table values.
        mu0 = 4e-7 * np.pi
        assert hi >= 0.99 * np.sqrt(4 * mu0 * n * 7957.75), n


def test_parse_grade():
    assert tables.parse_grade("n42sh") == (42, "SH")
    assert tables.grade_max_temp_C("N38UH") == 180
    assert tables.grade_remanence_T("N52") == pytest.approx(1.45)
    for bad in ("N43", "N42X", "42", "N42 SH", ""):
        with pytest.raises(ValueError, match="allowed"):
            tables.parse_grade(bad)


# --- IEC 60085 thermal classes ------------------------------------------------------------------
def test_thermal_classes_IEC_60085():
    assert tables.THERMAL_CLASSES_C == {"A": 105, "E": 120, "B": 130, "F": 155, "H": 180,
                                        "N": 200, "R": 220}
    assert tables.parse_thermal_class("f") == 155 == tables.parse_thermal_class("155")
    assert tables.parse_thermal_class(" 180.0 ") == 180
    for bad in ("G", "150", ""):
        with pytest.raises(ValueError, match="IEC 60085"):
            tables.parse_thermal_class(bad)


# --- demo catalogs within the tables -----------------------------------------------------------
@pytest.fixture(scope="module")
def demo():
    from pathlib import Path
    return load_catalogs(Path(__file__).resolve().parents[1] / "catalogs")


def test_demo_magnets_within_grade_table(demo):
    for m in demo.magnets.itertuples():
        number, suffix = tables.parse_grade(m.grade)
        lo, hi = tables.BR_RANGE_T[number]
        assert lo <= m.remanence_T <= hi, m.id
        assert m.max_temp_C <= tables.SUFFIX_MAX_TEMP_C[suffix], m.id
        assert -0.0012 <= m.br_temp_coeff_per_K <= -0.0009, m.id   # supplier quotes, MODEL.md
        assert 1.0 < m.recoil_permeability < 1.1, m.id
        # sizes are common stock blocks: whole millimetres
        for side in (m.length_m, m.width_m, m.thickness_m):
            assert side * 1e3 == pytest.approx(round(side * 1e3))


def test_demo_wires_within_standards(demo):
    w = demo.wires
    assert set(w.standard) == {"AWG", "metric"}
    awg = w[w.standard == "AWG"]
    gauges = [tables.nearest_awg(d)[0] for d in awg.bare_diameter_m]
    assert min(gauges) == 10 and max(gauges) == 26
    # printed to 3 decimals, like a supplier's sheet: within 0.0005 mm of ASTM B258
    assert np.allclose(awg.bare_diameter_m, tables.awg_diameter_m(gauges), atol=0.5e-6, rtol=0)
    metric = w[w.standard == "metric"]
    assert metric.bare_diameter_m.min() == pytest.approx(0.5e-3)
    assert metric.bare_diameter_m.max() == pytest.approx(2.5e-3)
    # overall diameter above the bare copper and within the thickest enamel grade
    assert np.all(w.overall_diameter_m > w.bare_diameter_m)
    assert np.all(w.overall_diameter_m <= tables.enamel_max_overall_diameter_m(
        w.bare_diameter_m.to_numpy(), 3) + 1e-9)
    assert set(w.thermal_class_C) <= set(tables.THERMAL_CLASSES_C.values())


def test_demo_layouts_stay_within_36_coils_and_48_poles(demo):
    for lay in demo.layouts.itertuples():
        assert lay.coils_per_unit * lay.max_multiple <= 36, lay.id
        assert lay.poles_per_unit * lay.max_multiple <= 48, lay.id
        assert lay.coils_per_unit % 3 == 0 and lay.poles_per_unit % 2 == 0
    pairs = set(zip(demo.layouts.coils_per_unit, demo.layouts.poles_per_unit))
    assert {(3, 4), (3, 2), (9, 8), (9, 10), (12, 10), (12, 14)} <= pairs


def test_demo_discs_in_stock_range(demo):
    d = demo.discs
    assert d.diameter_m.between(0.2, 0.4).all() and d.thickness_m.between(0.005, 0.010).all()
