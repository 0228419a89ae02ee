"""The search space: pymoo variables for every discrete choice, and their decoding into designs.

Catalog choices are categorical (pymoo `Choice` over row indices); counts are integers. The
layout's multiple and the parallel paths have bounds that depend on the layout, which pymoo cannot
express, so they are searched as integers over the widest range and decoded onto the nearest
allowed value (many genotypes, one design: the evaluation cache keys on the decoded design).
"""

from __future__ import annotations

from dataclasses import fields

import numpy as np
from pymoo.core.variable import Choice, Integer

from ..design import COIL_SHAPES, DesignBatch

VARIABLES = ("magnet", "layout", "multiple", "ring", "disc", "wire", "strands", "turns", "paths",
             "connection")
"""Variables of every space; "coil_shape" joins them where the scenario allows more than one shape."""


class SearchSpace:
    """Variables and decoding for one evaluator's catalogs and scenario."""

    def __init__(self, evaluator):
        sc, cat, table = evaluator.scenario, evaluator.catalogs, evaluator.windings
        self.layout_rows = [r for r in range(len(cat.layouts)) if table.valid_multiples(r)]
        if not self.layout_rows:
            raise ValueError("no layout in the catalog gives a balanced three-phase winding")
        self.multiples = {r: np.array(table.valid_multiples(r)) for r in self.layout_rows}
        self.n_ring = int(np.floor((sc.ring_radius_max_m - sc.ring_radius_min_m) / sc.ring_radius_step_m
                                   + 1e-9)) + 1
        self.ring_min, self.ring_step = sc.ring_radius_min_m, sc.ring_radius_step_m
        self.table = table
        self.max_multiple = max(int(m.max()) for m in self.multiples.values())
        self.max_paths = table.paths_ok.shape[1] - 1
        self.variables = {
            "magnet": Choice(options=list(range(len(cat.magnets)))),
            "layout": Choice(options=self.layout_rows),
            "multiple": Integer(bounds=(1, self.max_multiple)),
            "ring": Integer(bounds=(0, self.n_ring - 1)),
            "disc": Choice(options=list(range(len(cat.discs)))),
            "wire": Choice(options=list(range(len(cat.wires)))),
            "strands": Integer(bounds=(sc.strands_min, sc.strands_max)),
            "turns": Integer(bounds=(sc.turns_min, sc.turns_max)),
            "paths": Integer(bounds=(1, self.max_paths)),
            "connection": Choice(options=[0, 1]),
        }
        # The coil shape is a variable only where the scenario allows more than one (a space with
        # one shape is the space without the variable, so a rectangular-only search is exactly
        # the search before shapes existed; a space unpickled from such a run decodes to 0).
        shapes = [COIL_SHAPES.index(name) for name in getattr(sc, "coil_shapes", COIL_SHAPES)]
        self.fixed_coil_shape = shapes[0]
        if len(shapes) > 1:
            self.variables["coil_shape"] = Choice(options=shapes)
        # Nearest allowed multiple for every (layout, raw multiple), and the largest allowed number of
        # parallel paths not above the raw value for every winding: lookup tables, no per-design loop.
        self._multiple_lut = np.zeros((len(cat.layouts), self.max_multiple + 1), int)
        for r, allowed in self.multiples.items():
            raw = np.arange(self.max_multiple + 1)
            self._multiple_lut[r] = allowed[np.argmin(np.abs(raw[:, None] - allowed[None, :]), axis=1)]
        ok = table.paths_ok
        idx = np.where(ok, np.arange(ok.shape[1])[None, :], 0)
        self._paths_lut = np.maximum(np.maximum.accumulate(idx, axis=1), 1)

    @property
    def design_columns(self):
        """Columns of the designs this space decodes to (DesignBatch.as_matrix), the cache's width."""
        return len(fields(DesignBatch))

    def random_columns(self, n, rng):
        """n uniformly random genotypes as integer columns (decode them with `decode_columns`)."""
        return {name: rng.choice(var.options, n) if isinstance(var, Choice)
                else rng.integers(var.bounds[0], var.bounds[1] + 1, n)
                for name, var in self.variables.items()}

    def sample(self, n, rng) -> DesignBatch:
        """n designs decoded from uniformly random genotypes (feasible or not), from `rng`."""
        return self.decode_columns(self.random_columns(n, rng))

    def decode(self, X) -> DesignBatch:
        """Designs from pymoo's mixed-variable population: an object array of dicts."""
        cols = {name: np.fromiter((x[name] for x in X), dtype=np.int64, count=len(X)) for name in self.variables}
        return self.decode_columns(cols)

    def decode_columns(self, cols) -> DesignBatch:
        """Designs from integer columns named as VARIABLES (one entry per design)."""
        layout = cols["layout"]
        multiple = self._multiple_lut[layout, np.clip(cols["multiple"], 0, self.max_multiple)]
        combo = self.table.index(layout, multiple)
        paths = self._paths_lut[combo, np.clip(cols["paths"], 1, self.max_paths)]
        return DesignBatch(magnet=cols["magnet"], layout=layout, multiple=multiple,
                           ring_radius_m=self.ring_min + self.ring_step * cols["ring"],
                           disc=cols["disc"], wire=cols["wire"], strands=cols["strands"],
                           turns=cols["turns"], parallel_paths=paths, connection=cols["connection"],
                           coil_shape=cols.get("coil_shape", getattr(self, "fixed_coil_shape", 0)))

    def genotypes(self, matrix) -> list[dict]:
        """pymoo genotypes (dicts of VARIABLES) of designs given as DesignBatch matrix rows.

        The inverse of `decode_columns` on designs of this space: an allowed multiple and number
        of paths decode to themselves, and the ring radius back to its step index.
        """
        d = DesignBatch.from_matrix(matrix)
        cols = {"magnet": d.magnet, "layout": d.layout, "multiple": d.multiple,
                "ring": np.rint((d.ring_radius_m - self.ring_min) / self.ring_step), "disc": d.disc,
                "wire": d.wire, "strands": d.strands, "turns": d.turns, "paths": d.parallel_paths,
                "connection": d.connection, "coil_shape": d.coil_shape}
        names = list(self.variables)
        cols = {name: np.asarray(cols[name]).astype(np.int64).tolist() for name in names}
        return [dict(zip(names, values)) for values in zip(*(cols[name] for name in names))]

    def enumerate(self) -> DesignBatch:
        """Every distinct design of the space (for benchmarks on small catalogs: it grows fast)."""
        windings = [(r, k, p) for r in self.layout_rows for k in self.multiples[r]
                    for p in np.flatnonzero(self.table.paths_ok[self.table.index(np.array([r]), np.array([k]))[0]])]
        lists = [range(len(self.variables["magnet"].options)), range(len(windings)), range(self.n_ring),
                 self.variables["disc"].options, self.variables["wire"].options,
                 range(self.variables["strands"].bounds[0], self.variables["strands"].bounds[1] + 1),
                 range(self.variables["turns"].bounds[0], self.variables["turns"].bounds[1] + 1), (0, 1),
                 self.variables["coil_shape"].options if "coil_shape" in self.variables
                 else [getattr(self, "fixed_coil_shape", 0)]]
        grids = np.meshgrid(*[np.asarray(list(v)) for v in lists], indexing="ij")
        flat = [g.ravel() for g in grids]
        w = np.array(windings)[flat[1]]
        return DesignBatch(magnet=flat[0], layout=w[:, 0], multiple=w[:, 1],
                           ring_radius_m=self.ring_min + self.ring_step * flat[2], disc=flat[3],
                           wire=flat[4], strands=flat[5], turns=flat[6], parallel_paths=w[:, 2],
                           connection=flat[7], coil_shape=flat[8])
