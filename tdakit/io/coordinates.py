"""Sky positions plus parallax or redshift turned into 3-D Cartesian positions.

Every function here is vectorised over numpy arrays and works on any slice of rows, so a large catalogue can be
converted chunk by chunk. Angles are in the unit named by ``angle_unit`` (``"deg"`` by default, or ``"rad"``);
the unit is never guessed from the values. astropy (``pip install tdakit[formats]``) is imported only when a
cosmology is needed, so ``import tdakit`` does not load it.

The axes are the equatorial ones of the catalogue's frame: x towards (RA, Dec) = (0, 0), z towards Dec = +90.
"""

from __future__ import annotations

import math
import re
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

from tdakit._validation import check_bool, check_choice, fail
from tdakit.errors import InvalidDataError, InvalidParameterError, TdakitWarning

__all__ = [
    "ANGLE_UNITS",
    "DISTANCE_KINDS",
    "SkyConversion",
    "comoving_distance",
    "cosmology_record",
    "parallax_to_cartesian",
    "redshift_to_cartesian",
    "sky_to_unit_vectors",
]

ANGLE_UNITS = ("deg", "rad")
DISTANCE_KINDS = ("parallax", "redshift")
DEFAULT_COSMOLOGY = "Planck18"
_GRID_POINTS = 8193  # comoving distances of more redshifts than this come from a cubic spline on a grid
_COSMOLOGY_KEYS = ("H0", "Om0", "Ode0", "Tcmb0", "Neff", "Ob0")
_ANGLE_NAMES = {"deg": "deg", "degree": "deg", "degrees": "deg", "rad": "rad", "radian": "rad", "radians": "rad"}
_PARALLAX_NAMES = ("mas", "milliarcsecond", "milliarcseconds")


def sky_to_unit_vectors(ra: ArrayLike, dec: ArrayLike, *, angle_unit: str = "deg") -> NDArray[np.float64]:
    """Unit vectors towards sky positions.

    Parameters
    ----------
    ra, dec : array-like of shape (n,)
        Right ascension (any real value; it wraps) and declination (within [-90, 90] degrees or
        [-pi/2, pi/2] radians).
    angle_unit : {"deg", "rad"}, default="deg"
        The unit of ``ra`` and ``dec``.

    Returns
    -------
    ndarray of shape (n, 3)
        ``(cos dec cos ra, cos dec sin ra, sin dec)``.

    Raises
    ------
    InvalidDataError
        Non-finite angles, or a declination out of range (the first such row named).
    """
    ra, dec = _angles(ra, dec, angle_unit, "sky_to_unit_vectors")
    cos_dec = np.cos(dec)
    return np.column_stack((cos_dec * np.cos(ra), cos_dec * np.sin(ra), np.sin(dec)))


def parallax_to_cartesian(ra: ArrayLike, dec: ArrayLike, parallax: ArrayLike, *,
                          angle_unit: str = "deg") -> NDArray[np.float64]:
    """Cartesian positions in parsecs from sky positions and parallaxes in milliarcseconds.

    Parameters
    ----------
    ra, dec : array-like of shape (n,)
        Sky positions in ``angle_unit``.
    parallax : array-like of shape (n,)
        Parallaxes in mas; every one must be positive.
    angle_unit : {"deg", "rad"}, default="deg"
        The unit of ``ra`` and ``dec`` (parallaxes are always mas).

    Returns
    -------
    ndarray of shape (n, 3)
        Positions in pc, ``d * unit_vector`` with ``d = 1000 / parallax``.

    Raises
    ------
    InvalidDataError
        A parallax that is zero, negative or not finite (the number of such rows and the first named).

    Notes
    -----
    ``d = 1000 / parallax`` follows from the definition of the parsec (the distance at which 1 au subtends
    1 arcsec, in the small-angle limit) [1]_. It is a biased distance estimator when parallaxes are noisy: the
    inverse of an unbiased parallax overestimates the distance on average, and badly so for fractional
    parallax errors above ~10-20 %; choose rows with precise parallaxes (e.g. ``where="parallax_over_error > 10"``)
    or infer distances with a prior first [2]_.

    References
    ----------
    .. [1] IAU 2015 Resolution B2, "On recommended zero points for the absolute and apparent bolometric magnitude
       scales" (defines 1 pc = 648000/pi au, with the au of IAU 2012 Resolution B2; title from memory).
    .. [2] Bailer-Jones, C. A. L. (2015). "Estimating distances from parallaxes". PASP 127, 994 (from memory).
    """
    ra, dec = _angles(ra, dec, angle_unit, "parallax_to_cartesian")
    parallax = _column(parallax, "parallax", "parallax_to_cartesian", ra.shape[0])
    bad = ~(parallax > 0)
    if bad.any():
        raise InvalidDataError(
            f"Input 'parallax' of parallax_to_cartesian has {int(bad.sum())} value(s) <= 0 or not finite (first at "
            f"row {int(np.flatnonzero(bad)[0])}: {parallax[bad][0]!r} mas); 1000/parallax is no distance there. "
            f"Keep rows with a positive parallax, e.g. where='parallax > 0'.", parameter="parallax")
    return _scaled_unit_vectors(ra, dec, 1000.0 / parallax)


def comoving_distance(redshift: ArrayLike, *, cosmology=DEFAULT_COSMOLOGY, little_h: bool = False
                      ) -> NDArray[np.float64]:
    """Line-of-sight comoving distance of each redshift under a named cosmology, in Mpc (or Mpc/h).

    Parameters
    ----------
    redshift : array-like of shape (n,)
        Redshifts, each >= 0.
    cosmology : str, mapping or astropy Cosmology, default="Planck18"
        A name of one of astropy's built-in cosmologies (``"Planck18"``, ``"Planck15"``, ``"WMAP9"``, ...);
        parameters of a Lambda-CDM model as a mapping or text, ``{"H0": 70, "Om0": 0.3}`` or
        ``"H0=70,Om0=0.3"`` (flat unless ``Ode0`` is given; ``Tcmb0`` default 0 K, ``Neff``, ``Ob0`` optional);
        or an astropy ``Cosmology`` object.
    little_h : bool, default=False
        Return Mpc/h (distances times ``h = H0 / 100 km/s/Mpc``) instead of Mpc.

    Returns
    -------
    ndarray of shape (n,)

    Raises
    ------
    InvalidParameterError
        A cosmology that is not known, has parameters that are not finite (or ``H0 <= 0``, ``Tcmb0 < 0``, a
        parameter given twice), or gives no finite distance up to the largest redshift (no big bang).
    InvalidDataError
        A redshift that is negative or not finite, or where astropy's integral fails (its distance is not larger
        than at lower redshifts, e.g. z = 1e300).

    Notes
    -----
    ``D_C(z) = (c/H0) * integral_0^z dz'/E(z')`` [1]_ (eq. 15), computed by astropy. For more than 8193 redshifts
    astropy evaluates the distance on 8193 redshifts spaced uniformly in log(1 + z) over the data's range and a
    cubic spline interpolates it (within 1e-7 relative of astropy's direct values for z <= 20, measured in the
    tests).

    References
    ----------
    .. [1] Hogg, D. W. (1999). "Distance measures in cosmology". arXiv:astro-ph/9905116.
    """
    little_h = check_bool(little_h, "little_h", "comoving_distance")
    model, _ = resolve_cosmology(cosmology, "comoving_distance")
    z = _column(redshift, "redshift", "comoving_distance", None)
    _check_redshifts(z, "comoving_distance")
    distance = _distance_function(model, float(z.min()) if z.size else 0.0, float(z.max()) if z.size else 0.0,
                                  z.size)
    factor = model.H0.value / 100.0 if little_h else 1.0
    return distance(z) * factor


def redshift_to_cartesian(ra: ArrayLike, dec: ArrayLike, redshift: ArrayLike, *, cosmology=DEFAULT_COSMOLOGY,
                          angle_unit: str = "deg", little_h: bool = False) -> NDArray[np.float64]:
    """Comoving Cartesian positions in Mpc (or Mpc/h) from sky positions and redshifts.

    Parameters
    ----------
    ra, dec : array-like of shape (n,)
        Sky positions in ``angle_unit``.
    redshift : array-like of shape (n,)
        Redshifts, each >= 0 (peculiar velocities are not corrected: redshift-space positions).
    cosmology : str, mapping or astropy Cosmology, default="Planck18"
        See :func:`comoving_distance`; record it with :func:`cosmology_record`.
    angle_unit : {"deg", "rad"}, default="deg"
        The unit of ``ra`` and ``dec``.
    little_h : bool, default=False
        Mpc/h instead of Mpc.

    Returns
    -------
    ndarray of shape (n, 3)

    References
    ----------
    .. [1] Hogg, D. W. (1999). "Distance measures in cosmology". arXiv:astro-ph/9905116 (eq. 15).
    """
    ra, dec = _angles(ra, dec, angle_unit, "redshift_to_cartesian")
    z = _column(redshift, "redshift", "redshift_to_cartesian", ra.shape[0])
    return _scaled_unit_vectors(ra, dec, comoving_distance(z, cosmology=cosmology, little_h=little_h))


def cosmology_record(cosmology=DEFAULT_COSMOLOGY) -> dict:
    """The name, class and parameters of a cosmology as plain numbers, for a run's provenance.

    Parameters
    ----------
    cosmology : str, mapping or astropy Cosmology, default="Planck18"
        As for :func:`comoving_distance`.

    Returns
    -------
    dict
        ``name`` (None if unnamed), ``class``, ``H0`` (km/s/Mpc), ``Om0``, ``Ode0``, ``Tcmb0`` (K), ``Neff``,
        ``m_nu`` (eV, list), ``Ob0`` (None if not set).
    """
    return resolve_cosmology(cosmology, "cosmology_record")[1]


# -- the conversion as a load option ---------------------------------------------------------------------
@dataclass(frozen=True)
class SkyConversion:
    """How ``load_cloud(..., sky=...)`` turns three columns (RA, Dec, parallax or redshift) into x, y, z.

    Attributes
    ----------
    distance : {"parallax", "redshift"}
        What the third column holds: parallax in mas (positions in pc) or redshift (comoving positions in Mpc,
        or Mpc/h with ``little_h``).
    angle_unit : {"deg", "rad"}, default="deg"
        The unit of the RA and Dec columns. A unit named in the file that disagrees is an error.
    cosmology : str or mapping, optional
        Redshift only (default ``"Planck18"``): see :func:`comoving_distance`.
    little_h : bool, default=False
        Redshift only: Mpc/h instead of Mpc.
    recorded_parameters : dict, optional
        The cosmology's parameters recorded by an earlier run; a warning is given if the cosmology now resolves
        to different ones (e.g. a newer astropy changed a built-in cosmology).
    """

    distance: str
    angle_unit: str = "deg"
    cosmology: str | Mapping | None = None
    little_h: bool = False
    recorded_parameters: Mapping | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        check_choice(self.distance, "distance", "SkyConversion", DISTANCE_KINDS)
        check_choice(self.angle_unit, "angle_unit", "SkyConversion", ANGLE_UNITS)
        check_bool(self.little_h, "little_h", "SkyConversion")
        if self.recorded_parameters is not None and not isinstance(self.recorded_parameters, Mapping):
            raise fail("cosmology_parameters", "SkyConversion", "None or a mapping of recorded parameters",
                       self.recorded_parameters)
        if self.distance == "parallax" and (self.cosmology is not None or self.little_h):
            raise InvalidParameterError(
                "The 'cosmology' and 'little_h' settings of SkyConversion apply to distance='redshift' only; got "
                f"cosmology={self.cosmology!r}, little_h={self.little_h!r} with distance='parallax'.",
                parameter="cosmology")
        if self.distance == "redshift":
            spec = DEFAULT_COSMOLOGY if self.cosmology is None else self.cosmology
            if not isinstance(spec, (str, Mapping)):
                raise fail("cosmology", "SkyConversion", "a cosmology name or a mapping of parameters", spec)
            object.__setattr__(self, "cosmology", dict(spec) if isinstance(spec, Mapping) else spec)

    @property
    def unit(self) -> str:
        """The unit of the positions: ``"pc"``, ``"Mpc"`` or ``"Mpc/h"``."""
        if self.distance == "parallax":
            return "pc"
        return "Mpc/h" if self.little_h else "Mpc"

    @classmethod
    def from_value(cls, value) -> SkyConversion:
        """A conversion from a SkyConversion, a record (:meth:`to_dict`) or the text ``"parallax"``/``"redshift"``."""
        if isinstance(value, cls):
            return value
        if isinstance(value, str):
            if value not in DISTANCE_KINDS:
                raise fail("sky", "load_cloud", f"None or one of {', '.join(map(repr, DISTANCE_KINDS))} (what the "
                           f"third column holds), a mapping or a SkyConversion", value)
            return cls(value)
        if isinstance(value, Mapping):
            known = {"distance", "angle_unit", "cosmology", "little_h", "cosmology_parameters", "unit", "astropy"}
            unknown = sorted(set(value) - known)
            if unknown or "distance" not in value:
                raise fail("sky", "load_cloud", f"a mapping with 'distance' and optional keys {sorted(known)}", value)
            made = cls(value["distance"], value.get("angle_unit", "deg"), value.get("cosmology"),
                       value.get("little_h", False), value.get("cosmology_parameters"))
            if value.get("unit", made.unit) != made.unit:  # a record's unit follows from its settings
                raise fail("sky", "load_cloud", f"a mapping whose 'unit', if given, is {made.unit!r} (what these "
                           f"settings give)", value)
            return made
        raise fail("sky", "load_cloud", "None, 'parallax', 'redshift', a mapping or a SkyConversion", value)

    def to_dict(self) -> dict:
        """A JSON-ready record: the settings and, for redshifts, the cosmology's resolved parameters."""
        record = {"distance": self.distance, "angle_unit": self.angle_unit, "unit": self.unit}
        if self.distance == "redshift":
            import astropy

            record.update(cosmology=self.cosmology, little_h=self.little_h,
                          cosmology_parameters=cosmology_record(self.cosmology), astropy=astropy.__version__)
        return record

    def convert(self, table: NDArray[np.float64], units=(None, None, None), *, chunk_rows: int = 1 << 16
                ) -> NDArray[np.float64]:
        """Replace the (RA, Dec, distance column) rows of ``table`` by x, y, z, in place, chunk by chunk.

        Parameters
        ----------
        table : ndarray of shape (n, 3), float64, writeable
            Columns RA, Dec and parallax or redshift.
        units : sequence of 3 (str or None)
            The units the file names for the three columns, checked against the conversion.
        chunk_rows : int
            Rows converted at a time.

        Returns
        -------
        ndarray
            ``table`` itself, now holding positions in :attr:`unit`.
        """
        if table.ndim != 2 or table.shape[1] != 3:
            raise InvalidDataError(
                f"sky={self.distance!r} needs exactly three columns (RA, Dec, {self.distance}) in that order; got "
                f"{table.shape[1] if table.ndim == 2 else table.ndim} column(s).", parameter="columns")
        self._check_units(units)
        if self.distance == "parallax":
            step = lambda ra, dec, d: parallax_to_cartesian(ra, dec, d, angle_unit=self.angle_unit)  # noqa: E731
        else:
            model, parameters = resolve_cosmology(self.cosmology, "load_cloud")
            self._check_recorded(parameters)
            _check_redshifts(table[:, 2], "load_cloud")
            z_low, z_high = (float(table[:, 2].min()), float(table[:, 2].max())) if len(table) else (0.0, 0.0)
            distance = _distance_function(model, z_low, z_high, len(table))
            factor = model.H0.value / 100.0 if self.little_h else 1.0
            step = lambda ra, dec, z: _scaled_unit_vectors(  # noqa: E731
                *_angles(ra, dec, self.angle_unit, "load_cloud"), distance(z) * factor)
        for start in range(0, len(table), chunk_rows):
            rows = table[start:start + chunk_rows]
            rows[:] = step(rows[:, 0], rows[:, 1], rows[:, 2])
        return table

    def _check_units(self, units) -> None:
        for label, unit in zip(("RA", "Dec"), units[:2]):
            named = None if unit is None else _ANGLE_NAMES.get(unit.strip().lower(), unit)
            if named is not None and named != self.angle_unit:
                raise InvalidDataError(
                    f"The {label} column is in {unit!r} according to the file, but angle_unit={self.angle_unit!r}; "
                    f"state the unit of the angles with angle_unit ('deg' or 'rad').", parameter="angle_unit")
        third = units[2]
        if self.distance == "parallax" and third is not None and third.strip().lower() not in _PARALLAX_NAMES:
            raise InvalidDataError(
                f"The parallax column is in {third!r} according to the file; tdakit converts parallaxes in mas. "
                f"Convert the column first.", parameter="sky")

    def _check_recorded(self, parameters: dict) -> None:
        if self.recorded_parameters is not None and dict(self.recorded_parameters) != parameters:
            warnings.warn(
                f"The cosmology {self.cosmology!r} now has parameters {parameters}, not the recorded "
                f"{dict(self.recorded_parameters)}; positions differ from the recorded run.", TdakitWarning,
                stacklevel=4)


# -- helpers ----------------------------------------------------------------------------------------------
def _column(values: ArrayLike, name: str, function: str, length: int | None) -> NDArray[np.float64]:
    try:
        array = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError):
        raise fail(name, function, "a 1-D array of numbers", values) from None
    if array.ndim != 1 or (length is not None and array.shape[0] != length):
        expected = "a 1-D array" + (f" of length {length} (as ra)" if length is not None else "")
        raise InvalidDataError(f"Input {name!r} of {function} must be {expected}; got shape {array.shape}.",
                               parameter=name)
    return array


def _angles(ra, dec, angle_unit, function):
    check_choice(angle_unit, "angle_unit", function, ANGLE_UNITS)
    ra = _column(ra, "ra", function, None)
    dec = _column(dec, "dec", function, ra.shape[0])
    limit = 90.0 if angle_unit == "deg" else math.pi / 2
    for name, values, bad in (("ra", ra, ~np.isfinite(ra)), ("dec", dec, ~(np.abs(dec) <= limit))):
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise InvalidDataError(
                f"Input {name!r} of {function} has {int(bad.sum())} value(s) that are not finite"
                f"{' or outside [-' + format(limit, 'g') + ', ' + format(limit, 'g') + ']' if name == 'dec' else ''}"
                f" {angle_unit} (first at row {row}: {values[row]!r}). State the angle unit with angle_unit.",
                parameter=name)
    if angle_unit == "deg":
        return np.radians(ra), np.radians(dec)
    return ra, dec


def _scaled_unit_vectors(ra, dec, distance):
    cos_dec = np.cos(dec)
    return np.column_stack((distance * cos_dec * np.cos(ra), distance * cos_dec * np.sin(ra), distance * np.sin(dec)))


def _check_redshifts(z, function: str) -> None:
    bad = ~(z >= 0) | ~np.isfinite(z)
    if bad.any():
        raise InvalidDataError(
            f"Input 'redshift' of {function} has {int(bad.sum())} value(s) < 0 or not finite (first at row "
            f"{int(np.flatnonzero(bad)[0])}: {z[bad][0]!r}); comoving distances need z >= 0. Keep rows with "
            f"z >= 0, e.g. where='z >= 0'.", parameter="redshift")


def _distance_function(model, z_low: float, z_high: float, n: int):
    """D_C(z) in Mpc: astropy directly for few redshifts, else a cubic spline through a grid spanning the data.

    Every value astropy gives is checked (:func:`_checked_distances`) before use.
    """
    if n <= _GRID_POINTS or z_high == z_low:
        return lambda z: _checked_distances(model, z)
    from scipy.interpolate import CubicSpline

    grid = np.linspace(np.log1p(z_low), np.log1p(z_high), _GRID_POINTS)  # D_C is smooth in log(1 + z)
    spline = CubicSpline(grid, _checked_distances(model, np.expm1(grid)))
    return lambda z: spline(np.log1p(z))


def _checked_distances(model, z) -> NDArray[np.float64]:
    """D_C(z) from astropy, refused when not finite (no big bang) or not increasing with z (its integral failed)."""
    z = np.asarray(z, dtype=np.float64)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # invalid values are reported below, with their redshift
        distance = np.asarray(model.comoving_distance(z).value, dtype=np.float64)
    bad = ~np.isfinite(distance)
    if bad.any():
        first = int(np.flatnonzero(bad)[0])
        raise InvalidParameterError(
            f"The 'cosmology' parameter gives no finite comoving distance at redshift {z[first]!r} "
            f"({int(bad.sum())} redshift(s)): E(z)^2 = Om0 (1+z)^3 + Ok0 (1+z)^2 + Ode0 must stay positive from 0 "
            f"to the largest redshift (a model without a big bang, or parameters out of range: "
            f"{_record(model)}).", parameter="cosmology")
    order = np.argsort(z, kind="stable")
    wrong = (np.diff(distance[order]) < 0) if z.size > 1 else np.zeros(0, dtype=bool)
    zero = (distance <= 0) & (z > 0)
    if wrong.any() or zero.any():
        row = int(np.flatnonzero(zero)[0]) if zero.any() else int(order[np.flatnonzero(wrong)[0] + 1])
        raise InvalidDataError(
            f"Input 'redshift' holds {z[row]!r}, where astropy's comoving-distance integral fails (it gives "
            f"{distance[row]!r} Mpc, not more than at lower redshifts). Keep realistic redshifts, e.g. "
            f"where='z < 20'.", parameter="redshift")
    return distance


def resolve_cosmology(cosmology, function: str):
    """The astropy cosmology for a name, parameters or object, and its record (see :func:`cosmology_record`)."""
    from tdakit.io.catalogues._formats import require

    require("fits")  # astropy, or a clear message naming tdakit[formats]
    from astropy import cosmology as cosmologies

    if isinstance(cosmology, cosmologies.Cosmology):
        model = cosmology
    elif isinstance(cosmology, str) and cosmology in cosmologies.realizations.available:
        model = getattr(cosmologies, cosmology)
    elif isinstance(cosmology, (str, Mapping)):
        model = _lambda_cdm(_parameters(cosmology, function), function)
    else:
        raise _cosmology_error(cosmology, function)
    return model, _record(model)


def _parameters(spec, function: str) -> dict:
    if isinstance(spec, Mapping):
        spec = dict(spec)
        if isinstance(spec.get("parameters"), Mapping):  # a record from cosmology_record / provenance
            spec = dict(spec["parameters"])
        if set(spec) - set(_COSMOLOGY_KEYS) - {"name", "class", "m_nu"}:
            raise _cosmology_error(spec, function)
        return _numbers({key: value for key, value in spec.items() if key in _COSMOLOGY_KEYS and value is not None},
                        function)
    text = re.sub(r"^\s*(Flat)?LambdaCDM\s*\((.*)\)\s*$", r"\2", spec)
    parameters = {}
    for part in filter(None, (p.strip() for p in text.split(","))):
        key, _, value = part.partition("=")
        if key.strip() in parameters:
            raise InvalidParameterError(f"The 'cosmology' parameter of {function} gives {key.strip()!r} twice: "
                                        f"{spec!r}.", parameter="cosmology")
        try:
            parameters[key.strip()] = float(value)
        except ValueError:
            raise _cosmology_error(spec, function) from None
    return _numbers(parameters, function)


# (bound, excluded): H0 > 0 and Tcmb0 >= 0, which astropy does not check (it refuses negative densities and Neff)
_LOWER_BOUNDS = {"H0": (0.0, True), "Tcmb0": (0.0, False)}


def _numbers(parameters: dict, function: str) -> dict:
    """Each Lambda-CDM parameter a finite real number (not a bool) within its physical range."""
    for key, value in parameters.items():
        if key not in _COSMOLOGY_KEYS:
            continue
        number = value if isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(
            value, (bool, np.bool_)) else None
        low, strict = _LOWER_BOUNDS.get(key, (-math.inf, False))
        if number is None or not math.isfinite(number) or number < low or (strict and number == low):
            bound = "" if key not in _LOWER_BOUNDS else f" {'>' if strict else '>='} {low:g}"
            raise InvalidParameterError(
                f"The 'cosmology' parameter of {function} must give {key} as a finite real number{bound}. Got "
                f"{value!r} (type {type(value).__name__}) instead.", parameter="cosmology")
    return parameters


def _lambda_cdm(parameters: dict, function: str):
    from astropy.cosmology import FlatLambdaCDM, LambdaCDM

    unknown = sorted(set(parameters) - set(_COSMOLOGY_KEYS))
    if unknown or "H0" not in parameters or "Om0" not in parameters:
        raise _cosmology_error(parameters, function)
    try:
        if "Ode0" in parameters:
            return LambdaCDM(**parameters)
        return FlatLambdaCDM(**parameters)
    except (TypeError, ValueError) as exc:
        raise InvalidParameterError(
            f"The 'cosmology' parameter of {function} gives parameters astropy refuses: {exc}.",
            parameter="cosmology") from None


def _cosmology_error(value, function: str) -> InvalidParameterError:
    from astropy.cosmology import realizations

    names = ", ".join(repr(n) for n in sorted(realizations.available))
    keys = ", ".join(_COSMOLOGY_KEYS)
    return fail("cosmology", function, f"the name of an astropy cosmology ({names}), Lambda-CDM parameters such as "
                                       f"'H0=70,Om0=0.3' or {{'H0': 70, 'Om0': 0.3}} (keys {keys}), or an astropy "
                                       f"Cosmology", value)


def _record(model) -> dict:
    def number(quantity):
        return None if quantity is None else float(getattr(quantity, "value", quantity))

    m_nu = getattr(model, "m_nu", None)
    return {"name": model.name, "class": type(model).__name__, "H0": number(model.H0), "Om0": number(model.Om0),
            "Ode0": number(model.Ode0), "Tcmb0": number(model.Tcmb0), "Neff": number(model.Neff),
            "m_nu": None if m_nu is None else [float(v) for v in np.atleast_1d(m_nu.value)],
            "Ob0": number(model.Ob0)}
