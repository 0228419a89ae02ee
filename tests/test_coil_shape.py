"""The coil shape as a design choice: design-file key, batch field, and old files and runs.

`coil_shape` = "rectangular" (the default when a file leaves it out, so every design file and run
folder written before it keeps its meaning) or "keystone" (physics/geometry.py says which keystone).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from optimiser.catalogs import load_catalogs
from optimiser.cli import EXIT_INPUT, app
from optimiser.design import COIL_SHAPES, DesignBatch, design_toml, load_design
from optimiser.evaluate import Evaluator
from optimiser.physics import geometry
from optimiser.scenario import load_scenario
from optimiser.search.folder import read_front_data, write_front_data
from optimiser.search.problem import DesignCache
from optimiser.search.space import SearchSpace

CATALOGS = Path(__file__).resolve().parents[1] / "catalogs"


@pytest.fixture(scope="module")
def demo():
    catalogs = load_catalogs(CATALOGS)
    return catalogs, Evaluator(catalogs, load_scenario(None))


@pytest.fixture(scope="module")
def batch(demo):
    """400 random rectangular designs (the first ten columns of a sample of the space)."""
    sample = SearchSpace(demo[1]).sample(400, np.random.default_rng(17))
    return DesignBatch.from_matrix(sample.as_matrix()[:, :10])


def test_shape_names_match_the_geometry():
    assert COIL_SHAPES == geometry.COIL_SHAPES


def test_design_file_without_the_key_is_rectangular_and_keystone_round_trips(demo, batch, tmp_path):
    catalogs, _ = demo
    record = batch.take([0]).records(catalogs)[0]
    assert record["coil_shape"] == "rectangular"
    old = "\n".join(line for line in design_toml(record).splitlines() if not line.startswith("coil_shape"))
    path = tmp_path / "old.toml"
    path.write_text(old + "\n", encoding="utf-8")
    assert load_design(path, catalogs).coil_shape.tolist() == [0]
    path.write_text(design_toml(record | {"coil_shape": "keystone"}), encoding="utf-8")
    one = load_design(path, catalogs)
    assert one.coil_shape.tolist() == [1]
    assert one.records(catalogs)[0] == record | {"coil_shape": "keystone"}


@pytest.mark.parametrize("value", ['"round"', "1", '"Keystone"'])
def test_bad_coil_shape_is_one_line_with_its_key(runner, demo, batch, tmp_path, value):
    catalogs, _ = demo
    text = re.sub(r'(?m)^coil_shape = .*$', f"coil_shape = {value}",
                  design_toml(batch.take([0]).records(catalogs)[0]))
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    res = runner.invoke(app, ["evaluate", "--catalogs", str(CATALOGS), "--design", str(path)])
    assert res.exit_code == EXIT_INPUT, res.output
    lines = [ln for ln in res.output.splitlines() if ln.strip()][:-1]
    assert len(lines) == 1 and re.search(r": line \d+, key coil_shape: ", lines[0]), lines
    assert '"rectangular" or "keystone"' in lines[0] and "Traceback" not in res.output


def test_matrix_of_an_old_run_decodes_as_rectangular(batch):
    m = batch.as_matrix()
    assert m.shape[1] == 11
    old = DesignBatch.from_matrix(m[:, :10])
    assert np.all(old.coil_shape == 0)
    assert np.array_equal(old.as_matrix()[:, :10], m[:, :10])
    assert np.array_equal(DesignBatch.from_matrix(m).as_matrix(), m)


def test_old_cache_and_front_data_read_with_rectangular_coils(demo, batch, tmp_path):
    catalogs, _ = demo
    codes = DesignCache.encode(batch.as_matrix())
    cache = DesignCache(n_var=10, n_obj=4)  # the width a run made before the coil shape had
    cache.lookup(batch.as_matrix()[:5, :10], lambda m: (np.zeros((len(m), 4)), np.zeros((len(m), 3))))
    state = cache.__getstate__()
    restored = DesignCache.__new__(DesignCache)
    restored.__setstate__(state)
    assert restored.codes.shape[1] == 11 and np.all(restored.codes[:, 10] == 0)
    rows = restored.lookup(batch.as_matrix()[:5], lambda m: pytest.fail("seen before: no evaluation"))
    assert rows.tolist() == [0, 1, 2, 3, 4]
    write_front_data(tmp_path / "front.npz", np.arange(5), codes[:5, :10])
    _, read = read_front_data(tmp_path / "front.npz", catalogs)
    assert read.shape == (5, 11) and np.all(read[:, 10] == 0)
    bad = codes[:5].copy()
    bad[0, 10] = 2
    write_front_data(tmp_path / "front.npz", np.arange(5), bad)
    with pytest.raises(Exception, match="out of the catalogs' ranges"):
        read_front_data(tmp_path / "front.npz", catalogs)


def test_evaluator_gives_keystone_designs_their_own_coil(demo, batch):
    _, evaluator = demo
    rect = evaluator.evaluate(batch)
    key = evaluator.evaluate(DesignBatch.from_matrix(np.column_stack([batch.as_matrix()[:, :10],
                                                                      np.ones(len(batch))])))
    fits = rect["coil_leg_width_m"] > 0
    assert fits.sum() > 50
    assert np.all(key["coil_leg_width_m"][fits] > rect["coil_leg_width_m"][fits])
    assert np.all(key["coil_hole_radial_m"] == rect["coil_hole_radial_m"])


def test_rectangular_rows_of_a_mixed_batch_are_bit_for_bit_the_rectangular_batch(demo, batch):
    _, evaluator = demo
    rect = evaluator.evaluate(batch)
    shape = np.random.default_rng(3).integers(0, 2, len(batch))
    mixed = evaluator.evaluate(DesignBatch.from_matrix(np.column_stack([batch.as_matrix()[:, :10], shape])))
    r = shape == 0
    for name, value in rect.values.items():
        assert np.array_equal(np.asarray(mixed[name])[r], np.asarray(value)[r], equal_nan=True), name
    assert np.array_equal(mixed.objectives[r], rect.objectives[r], equal_nan=True)
    # keystone rows get the keystone field: their EMF differs from the rectangular coil's
    k = (shape == 1) & (rect["coil_leg_width_m"] > 0)
    assert np.all(mixed["emf_line_rms_per_rpm_V"][k] != rect["emf_line_rms_per_rpm_V"][k])


def test_keystone_wire_copper_and_eddy_loss_use_the_keystone_lengths(demo, batch):
    # Wire length = Q N n_s (P_h + pi w) (the mean turn, checked against traced turns in
    # test_geometry.py); copper mass = length x pi d^2/4 x 8890 kg/m^3 (IEC 60028 density); the
    # strand eddy loss scales with the conductor length in the field, 2 L / cos(pi/Q) a turn.
    _, evaluator = demo
    key = DesignBatch.from_matrix(np.column_stack([batch.as_matrix()[:, :10], np.ones(len(batch))]))
    ev = evaluator.evaluate(key, rpm=200.0)
    geo = evaluator._geometry(key)
    coil = geo.coil
    ok = coil.leg_width_m > 1e-4  # narrower legs are floored for the physics (infeasible anyway)
    turn = coil.hole_perimeter_m + np.pi * coil.leg_width_m
    assert np.allclose(ev["mean_turn_length_m"][ok], turn[ok], rtol=1e-12)
    assert np.allclose(ev["wire_length_m"][ok], (geo.coils * key.turns * key.strands * turn)[ok], rtol=1e-12)
    d = geo.wire["bare_diameter_m"]
    assert np.allclose(ev["copper_mass_kg"], ev["wire_length_m"] * np.pi * d ** 2 / 4 * 8890.0, rtol=1e-12)
    fem = evaluator._field_and_emf(key, geo)
    rect_length = geo.coils * 2.0 * key.turns * key.strands * geo.mag["length_m"] * np.pi * d ** 2 / 4
    assert np.allclose(fem.active_copper_m3 / rect_length, 1 / np.cos(np.pi / geo.coils), rtol=1e-12)


def _scenario(tmp_path, text):
    path = tmp_path / "boat.toml"
    path.write_text(text, encoding="utf-8")
    return load_scenario(path)


def test_space_searches_both_shapes_by_default_and_the_scenario_restricts_it(demo, tmp_path):
    from optimiser.search.space import VARIABLES

    catalogs, evaluator = demo
    both = SearchSpace(evaluator)
    assert both.variables["coil_shape"].options == [0, 1]
    rect = SearchSpace(Evaluator(catalogs, _scenario(tmp_path, 'coil_shapes = ["rectangular"]\n')))
    assert tuple(rect.variables) == VARIABLES  # exactly the space before shapes existed
    key = SearchSpace(Evaluator(catalogs, _scenario(tmp_path, 'coil_shapes = ["keystone"]\n')))
    rng = np.random.default_rng(1)
    assert set(both.sample(500, rng).coil_shape) == {0, 1}
    assert set(rect.sample(50, rng).coil_shape) == {0} and set(key.sample(50, rng).coil_shape) == {1}
    # genotypes round-trip with the shape; the exact enumeration doubles
    m = both.sample(200, rng).as_matrix()
    assert np.array_equal(both.decode(np.array(both.genotypes(m), dtype=object)).as_matrix(), m)
    # a space pickled by a run made before the shape existed decodes to rectangular coils
    old = SearchSpace(Evaluator(catalogs, _scenario(tmp_path, 'coil_shapes = ["rectangular"]\n')))
    del old.fixed_coil_shape
    assert set(old.decode(np.array(old.genotypes(m[:, :10]), dtype=object)).coil_shape) == {0}


def test_bad_coil_shapes_key_is_refused_with_its_line(tmp_path):
    from optimiser.errors import InputError

    for text, says in (('coil_shapes = ["round"]\n', "unknown 'round'"), ("coil_shapes = []\n", "non-empty list"),
                       ('coil_shapes = ["keystone", "keystone"]\n', "twice")):
        with pytest.raises(InputError) as info:
            _scenario(tmp_path, text)
        (p,) = info.value.problems
        assert p.column == "coil_shapes" and p.row == 1 and says in p.message, p


def test_evaluate_json_gives_the_shape_and_the_former(runner, demo, batch, tmp_path):
    import json

    catalogs, _ = demo
    path = tmp_path / "key.toml"
    path.write_text(design_toml(batch.take([3]).records(catalogs)[0] | {"coil_shape": "keystone"}), encoding="utf-8")
    res = runner.invoke(app, ["evaluate", "--catalogs", str(CATALOGS), "--design", str(path), "--json"])
    assert res.exit_code in (0, 1), res.output
    g = json.loads(res.output)["geometry"]
    assert g["coil_shape"] == "keystone"
    coils = json.loads(res.output)["winding"]["coils"]
    assert g["former_side_angle_deg"] == pytest.approx(180 / coils)
    assert g["former_outer_width_m"] == pytest.approx(
        g["former_inner_width_m"] + 2 * g["former_length_m"] * np.tan(np.pi / coils), rel=1e-12)
    assert g["former_length_m"] == g["coil_hole_radial_m"]
