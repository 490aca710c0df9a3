"""From a gudhi simplex tree to tdakit's Diagrams, with the vertices that locate each class."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray


def tree_pairs(tree, max_dim: int, field: int) -> list[list[tuple[float, float, list[int], list[int]]]]:
    """Persistence pairs per dimension as (birth, death, birth simplex, death simplex)."""
    # H_k of the top dimension is only right when no simplices of dimension > max_dim exist.
    tree.compute_persistence(homology_coeff_field=field, persistence_dim_max=tree.dimension() <= max_dim)
    per_dim: list[list] = [[] for _ in range(max_dim + 1)]
    for birth_simplex, death_simplex in tree.persistence_pairs():
        dim = len(birth_simplex) - 1
        if dim > max_dim:
            continue
        birth = tree.filtration(birth_simplex)
        death = tree.filtration(death_simplex) if death_simplex else np.inf
        if death > birth:
            per_dim[dim].append((birth, death, birth_simplex, death_simplex))
    return per_dim


def assemble(per_dim, vertex_ids: NDArray[np.intp], *, squared: bool, cap_reached: bool):
    """Arrays per dimension, sorted by decreasing persistence then birth; vertices mapped to cloud indices.

    Returns (pairs, cutoff_flags, birth_vertices, death_vertices).
    """
    pairs, flags, births, deaths = [], [], [], []
    for dim, rows in enumerate(per_dim):
        values = np.array([(b, d) for b, d, _, _ in rows], dtype=np.float64).reshape(-1, 2)
        bverts = _vertex_table([r[2] for r in rows], dim + 1, vertex_ids)
        dverts = _vertex_table([r[3] for r in rows], dim + 2, vertex_ids)
        if squared:
            # gudhi's squared values (alpha 'safe' precision, witness relaxations) carry rounding of
            # ~1e-16 relative; co-spherical points then give pairs of "persistence" 1e-16 that are
            # rounding, not topology. Drop pairs shorter than 1e-12 of their death value.
            values = np.sqrt(np.maximum(values, 0.0))
            death = values[:, 1]
            alive = np.isinf(death) | (death - values[:, 0] > 1e-12 * np.abs(death))
            values, bverts, dverts = values[alive], bverts[alive], dverts[alive]
        order = np.lexsort((values[:, 0], -(values[:, 1] - values[:, 0])))
        values, bverts, dverts = values[order], bverts[order], dverts[order]
        flag = np.isinf(values[:, 1]) if cap_reached else np.zeros(len(values), dtype=bool)
        if dim == 0 and flag.any():
            flag[np.flatnonzero(np.isinf(values[:, 1]))[np.argmin(values[np.isinf(values[:, 1]), 0])]] = False
        for array in (values, flag, bverts, dverts):
            array.setflags(write=False)
        pairs.append(values)
        flags.append(flag)
        births.append(bverts)
        deaths.append(dverts)
    return tuple(pairs), tuple(flags), tuple(births), tuple(deaths)


def _vertex_table(simplices, width, vertex_ids):
    table = np.full((len(simplices), width), -1, dtype=np.intp)
    for row, simplex in enumerate(simplices):
        if simplex:
            table[row, : len(simplex)] = vertex_ids[np.asarray(simplex, dtype=np.intp)]
    return table
