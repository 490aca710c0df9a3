"""The confidence band object: which target it covers, how valid it is, and which features it keeps."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from tdakit._validation import check_int, fail
from tdakit.core.topology.diagrams import Diagrams
from tdakit.errors import InvalidDataError, InvalidParameterError

__all__ = ["Band"]


@dataclass(frozen=True, eq=False)
class Band:
    """A band around persistence diagrams, in bottleneck radius per homology dimension.

    A diagram point (b, d) is significant iff ``d - b > 2 * radius(k)``, i.e. it
    lies above the strip of height 2r over the diagonal; classes that never die
    are significant, and a class alive at a finite cap counts with ``cap - b``.

    Only a band whose ``calls`` is True marks features real: a band that failed
    tdakit's planted-truth evaluation (it called noise real) keeps its strip for
    drawing, and :meth:`significant` refuses with ``no_call_reason``.

    Attributes
    ----------
    method : str
        ``"dtm"``, ``"density"``, ``"subsample"``, ``"bootstrap"`` or ``"landscape"``.
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
    calls : bool
        Whether the band marks single features real or noise (see above).
    no_call_reason : str
        Why it does not, when ``calls`` is False.
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
    calls: bool = True
    no_call_reason: str = ""

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
        """Boolean mask over the rows of ``diagrams[k]``: above the strip (essential classes always).

        Raises
        ------
        InvalidParameterError
            The band does not call features (``calls`` is False).
        """
        if not self.calls:
            raise InvalidParameterError(f"The {self.method} band does not mark single features real or noise: "
                                        f"{self.no_call_reason}", parameter="band")
        return (self.margin(diagrams, k) > 0) | diagrams.essential(k)

    def blind_dimensions(self) -> list[int]:
        """Dimensions whose strip is taller than the data's scale: nothing could ever be called there.

        The ceiling is the scale cap or, where the band recorded it, twice the largest distance from
        one point to the others (at least the cloud's diameter, the longest a Rips-scale bar can live).
        """
        ceiling = min(self.diagrams.max_scale, self.params.get("data_scale") or np.inf)
        return [k for k in range(len(self.radii)) if np.isfinite(ceiling) and self.strip_height(k) >= ceiling]

    def blind_advice(self) -> str:
        """What to change when :meth:`blind_dimensions` is not empty, in words."""
        term = self.params.get("landmark_term") or 0.0
        if self.method == "dtm":
            return (f"of its radius {self.radii[0]:.4g}, {term:.4g} is the landmark bound: take more landmarks (a "
                    f"smaller coverage radius), or more points per DTM average to shrink the rest")
        if self.method == "subsample":
            return "raise subsample_size (the strip shrinks as subsamples grow) or take more landmarks"
        return "take more landmarks or more replicates, or another band"

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
        if not self.calls:
            lines.append(f"  no verdict on single features: {self.no_call_reason}")
        bound = self.diagrams.params.get("landmark_bound")
        if bound:
            lines.append(f"  landmark bound {bound:.4g}: bars shorter than {2 * bound:.4g} can come from the landmark "
                         "spacing alone")
        blind = self.blind_dimensions()
        if blind:
            lines.append(f"  this band cannot see anything in H{', H'.join(map(str, blind))}: its strip is taller than "
                         f"any bar there; {self.blind_advice()}")
        for k in range(len(self.radii)):
            pers = self.diagrams.persistence(k)
            finite = np.sort(pers[np.isfinite(pers)])[::-1][:3]
            longest = ", ".join(f"{p:.4g}" for p in finite) or "-"
            count = int(self.significant(self.diagrams, k).sum()) if self.calls else "no verdict"
            lines.append(f"  H{k}: strip height {self.strip_height(k):.4g}; longest bars {longest}; "
                         f"significant {count}")
        return "\n".join(lines)

    def __repr__(self) -> str:
        radii = ", ".join(f"{r:.4g}" for r in self.radii)
        return f"Band(method={self.method!r}, level={self.level}, radii=({radii}), validity={self.validity!r})"
