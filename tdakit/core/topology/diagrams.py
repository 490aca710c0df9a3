"""Persistence diagrams as a value object that remembers how they were made."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from tdakit._validation import check_int, check_real

__all__ = ["Diagrams"]


@dataclass(frozen=True, eq=False)
class Diagrams:
    """Persistence diagrams of one filtration, one array per homology dimension.

    ``D[k]`` is the float array of shape (m, 2) of (birth, death) pairs in
    homology dimension k, sorted by decreasing persistence; ``death = inf`` both
    for essential classes and for classes still alive at a finite scale cap.
    The two are told apart by :meth:`essential` and :meth:`alive_at_cutoff`.

    Attributes
    ----------
    pairs : tuple of ndarray
        ``pairs[k]`` is ``D[k]``.
    cutoff_flags : tuple of ndarray of bool
        True where a class has ``death = inf`` only because the filtration was
        stopped at ``max_scale`` (its true death is at least ``max_scale``).
    birth_vertices, death_vertices : tuple of ndarray of int
        Cloud indices of the vertices of each class's birth simplex (shape (m, k+1))
        and death simplex (shape (m, k+2); -1 for classes that never die).
    filtration : str
        ``"rips"``, ``"witness"``, ``"alpha"``, ``"dtm"``.
    units : str
        The scale of every birth and death in plain words.
    max_scale : float
        Where the filtration was stopped (inf: complete).
    coefficient_field : int
        The prime p of the coefficient field Z/p.
    params : dict
        Every option that shaped the filtration (for provenance).
    """

    pairs: tuple[NDArray[np.float64], ...]
    cutoff_flags: tuple[NDArray[np.bool_], ...]
    birth_vertices: tuple[NDArray[np.intp], ...] = field(repr=False)
    death_vertices: tuple[NDArray[np.intp], ...] = field(repr=False)
    filtration: str = "rips"
    units: str = "length"
    max_scale: float = np.inf
    coefficient_field: int = 2
    params: dict = field(default_factory=dict)

    @property
    def max_dim(self) -> int:
        return len(self.pairs) - 1

    def __getitem__(self, dim: int) -> NDArray[np.float64]:
        return self.pairs[self._dim(dim)]

    def __len__(self) -> int:
        return len(self.pairs)

    def __iter__(self):
        return iter(self.pairs)

    def _dim(self, dim: object) -> int:
        return check_int(dim, "dim", "Diagrams", low=0, high=self.max_dim, note="a computed homology dimension")

    def persistence(self, dim: int) -> NDArray[np.float64]:
        """Death minus birth of every class in dimension ``dim`` (inf for never-dying classes)."""
        pairs = self[dim]
        return pairs[:, 1] - pairs[:, 0]

    def alive_at_cutoff(self, dim: int) -> NDArray[np.bool_]:
        """Mask of classes alive at the finite cap ``max_scale`` (not essential)."""
        return self.cutoff_flags[self._dim(dim)]

    def capped(self, dim: int) -> NDArray[np.float64]:
        """``D[dim]`` with classes alive at the cap dying at the cap, so capped diagrams compare finitely."""
        pairs = self[dim].copy()
        pairs[self.alive_at_cutoff(dim), 1] = self.max_scale
        return pairs

    def essential(self, dim: int) -> NDArray[np.bool_]:
        """Mask of classes that never die in the complete filtration."""
        return np.isinf(self[dim][:, 1]) & ~self.alive_at_cutoff(dim)

    def betti_at(self, scale: float) -> tuple[int, ...]:
        """Betti numbers of the complex at filtration value ``scale``."""
        scale = check_real(scale, "scale", "Diagrams.betti_at")
        return tuple(int(((p[:, 0] <= scale) & (p[:, 1] > scale)).sum()) for p in self.pairs)

    def summary(self) -> str:
        """One line per dimension: number of classes, longest finite bar, essential and cut-off counts."""
        lines = [f"{self.filtration} diagrams ({self.units}), max_scale={self.max_scale:g}, Z/{self.coefficient_field}"]
        for k in range(len(self.pairs)):
            pers = self.persistence(k)
            finite = pers[np.isfinite(pers)]
            longest = f"{finite.max():.4g}" if finite.size else "-"
            n_essential, n_cut = int(self.essential(k).sum()), int(self.alive_at_cutoff(k).sum())
            lines.append(f"  H{k}: {len(pers)} classes, longest finite {longest}, "
                         f"essential {n_essential}, alive at cutoff {n_cut}")
        return "\n".join(lines)

    def __repr__(self) -> str:
        counts = ", ".join(f"H{k}={len(p)}" for k, p in enumerate(self.pairs))
        return f"Diagrams({self.filtration}, {counts}, units={self.units!r}, max_scale={self.max_scale:g})"
