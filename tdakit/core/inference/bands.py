"""The confidence band object: which target it covers, how valid it is, and which features it keeps."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from tdakit._validation import check_int, fail
from tdakit.core.topology.diagrams import Diagrams
from tdakit.errors import InvalidDataError

__all__ = ["Band"]


@dataclass(frozen=True, eq=False)
class Band:
    """A band around persistence diagrams, in bottleneck radius per homology dimension.

    A diagram point (b, d) is significant iff ``d - b > 2 * radius(k)``, i.e. it
    lies above the strip of height 2r over the diagonal; classes that never die
    are significant, and a class alive at a finite cap counts with ``cap - b``.

    Attributes
    ----------
    method : str
        ``"subsample"``, ``"density"``, ``"bootstrap"`` or ``"landscape"``.
    level : float
        Nominal coverage.
    radii : tuple of float
        Bottleneck radius per homology dimension (the units of ``diagrams``).
    diagrams : Diagrams
        The diagrams the band was built for (for ``"density"``, the KDE's diagrams).
    target : str
        What the band covers, in words.
    validity : str
        ``"confidence set"`` (with its source) or ``"resampling heuristic"``.
    statement : str
        One sentence a reader can quote: what, at which level, how valid.
    landmark_handling : str
        Whether and how the landmark approximation is accounted for.
    replicates : ndarray
        The per-replicate statistics behind the radius.
    seed : int
        Root seed: the same seed replays the same band.
    params : dict
        Every option used.
    curves : dict
        Extra curves (landscape method: grid, mean landscape, half-width per dimension).
    """

    method: str
    level: float
    radii: tuple[float, ...]
    diagrams: Diagrams
    target: str
    validity: str
    statement: str
    landmark_handling: str
    replicates: NDArray[np.float64] = field(repr=False)
    seed: int = 0
    params: dict = field(default_factory=dict)
    curves: dict = field(default_factory=dict, repr=False)

    def radius(self, k: int) -> float:
        """Bottleneck radius of the band in homology dimension ``k``."""
        k = check_int(k, "k", "Band.radius", low=0, high=len(self.radii) - 1, note="a dimension of the band")
        return float(self.radii[k])

    def strip_height(self, k: int) -> float:
        """Height of the noise strip above the diagonal: 2 x radius."""
        return 2.0 * self.radius(k)

    def margin(self, diagrams: Diagrams, k: int) -> NDArray[np.float64]:
        """Persistence minus the strip height for each class (positive = significant)."""
        self._check_compatible(diagrams)
        pairs = diagrams[k]
        death = np.where(diagrams.alive_at_cutoff(k), diagrams.max_scale, pairs[:, 1])
        return (death - pairs[:, 0]) - self.strip_height(k)

    def significant(self, diagrams: Diagrams, k: int) -> NDArray[np.bool_]:
        """Boolean mask over the rows of ``diagrams[k]``: above the strip (essential classes always)."""
        return (self.margin(diagrams, k) > 0) | diagrams.essential(k)

    def _check_compatible(self, diagrams) -> None:
        if not isinstance(diagrams, Diagrams):
            raise fail("diagrams", "Band.significant", "a Diagrams object (from compute_diagrams or band.diagrams)",
                       diagrams)
        if diagrams.filtration != self.diagrams.filtration or diagrams.units != self.diagrams.units:
            raise InvalidDataError(
                f"These diagrams ({diagrams.filtration}, {diagrams.units}) are not on the scale of the band "
                f"({self.diagrams.filtration}, {self.diagrams.units}); bands and thresholds never carry over "
                f"between filtrations.", parameter="diagrams")

    def table(self, diagrams: Diagrams | None = None):
        """Tidy pandas table of every feature with its significance (see :func:`significance_table`)."""
        from tdakit.core.inference.tables import significance_table

        return significance_table(self.diagrams if diagrams is None else diagrams, self)

    def summary(self) -> str:
        lines = [self.statement, f"  landmarks: {self.landmark_handling}"]
        for k in range(len(self.radii)):
            pers = self.diagrams.persistence(k)
            finite = np.sort(pers[np.isfinite(pers)])[::-1][:3]
            longest = ", ".join(f"{p:.4g}" for p in finite) or "-"
            lines.append(f"  H{k}: strip height {self.strip_height(k):.4g}; longest bars {longest}; "
                         f"significant {int(self.significant(self.diagrams, k).sum())}")
        return "\n".join(lines)

    def __repr__(self) -> str:
        radii = ", ".join(f"{r:.4g}" for r in self.radii)
        return f"Band(method={self.method!r}, level={self.level}, radii=({radii}), validity={self.validity!r})"
