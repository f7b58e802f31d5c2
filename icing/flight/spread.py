"""How sure is this forecast: a seeded ensemble over the assumptions the chain makes from a sounding.

A sounding gives temperature and humidity; every step from there to ice on a wing rests on an assumption with a
published (or common-practice) value that is not the only plausible one. :data:`ASSUMPTIONS` lists them, each with
its default (what the deterministic chain uses), a plausible range and where the range comes from.
:func:`route_spread` draws ``members`` sets of assumptions (a Latin hypercube, seeded), re-diagnoses the soundings
and re-samples them along the route for each, computes the accretion, and reports per segment the share of
members at each intensity or worse (``p_light``, ``p_moderate``, ``p_severe``), the 10th and 90th percentile of
the segment's accretion and the assumption that moves it most (``spread_driver``). It is reached through
``assess_route(..., spread=True)``; the accretion and intensity words are the deterministic chain's own (the hook
in :mod:`icing.flight.assess` hands its functions in, so there is one definition of each).

Method (documented choices)
---------------------------
* Draws: a Latin hypercube (McKay, Beckman and Conover 1979, Technometrics 21, 239-245): each assumption's range
  is cut into ``members`` equal-probability strata and every stratum is used once, in a random order per
  assumption (numpy's ``default_rng(seed)``), so even 30 members cover each range evenly and the draws of two
  assumptions are nearly uncorrelated. A ``uniform`` assumption is uniform in its range, a ``log-uniform`` one
  (a factor "either way") uniform in its logarithm. An assumption whose range is zero stays at its default.
* Unknown: a member without usable data at a segment (the deterministic chain's ``unknown``: no data, or
  partial data with no icing found) counts as *at every intensity or worse* there, as ``unknown`` ranks above
  ``severe`` in the segment table: missing data raise the shares, never lower them. The accretion percentiles
  are unknown (NaN) where any member has no data, and lower bounds where members have partial data.
* Driver: the Spearman rank correlation, over the members, of each varied assumption's draw with the segment's
  accretion (with the segment's intensity code where the accretion does not vary); the assumption with the
  largest absolute correlation is the driver, ``none`` where nothing varies, ``unknown`` where data are missing.
  With a Latin hypercube the draws are nearly independent, so the correlation ranks the assumptions the way a
  first-order sensitivity index would (e.g. Saltelli et al. 2008, Global Sensitivity Analysis, ch. 1).
* Cost: the soundings are re-diagnosed once per member with :func:`icing.physics.diagnose.diagnose_arrays`
  (the compiled kernel takes one set of thresholds per call, so members cannot share a call); the horizontal
  matching weights are computed once and re-weighted per member; the members' samples are scored in one
  vectorised call of the accretion model. Only the planned altitude is sampled (no alternatives).

Sounding sources (:class:`icing.flight.sources.SoundingSource`) are spread over the assumptions. A model file
with an ensemble-member dimension is an ensemble as it stands: :class:`ModelEnsemble` reads it as one
:class:`icing.flight.gridsource.GridSource` per member, and ``spread=True`` then takes its members as the
ensemble (the diagnosis's assumptions are not varied on a grid: each member's grid would be diagnosed again for
each draw). A single model grid is not spread.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from types import SimpleNamespace

import numpy as np

from icing import CAUTION
from icing.errors import ConfigError
from icing.flight.sources import DISTANCE_FLOOR_M, DISTANCE_POWER, SoundingSource
from icing.physics import cloud, microphysics, thermo

__all__ = ["Assumption", "ASSUMPTIONS", "SPREAD_COLUMNS", "DISTANCE_FLOOR_M", "MEMBER_DIMS", "ModelEnsemble",
           "assumption_table", "draw_members", "resolve_ranges", "member_weights", "route_spread", "spread_summary"]

SPREAD_COLUMNS = ["p_light", "p_moderate", "p_severe", "accretion_p10_mm", "accretion_p90_mm", "spread_driver"]
# The floor of the inverse-distance weighting of icing.flight.sources.SoundingSource.weights (10 km); the
# distance power of a member re-weights its output by this floored distance (tests check the two agree).
UNKNOWN_CODE = 5  # segment intensity code of "unknown" (after severe = 4), as in the segment table
LEVELS = {"p_light": 2, "p_moderate": 3, "p_severe": 4}  # codes of icing.flight.assess.INTENSITIES
# Names of an ensemble-member dimension: CF's realization (standard_name), cfgrib's number, and common others.
MEMBER_DIMS = ("realization", "member", "number", "ensemble_member", "ensemble")


@dataclass(frozen=True)
class Assumption:
    """One assumption of the chain: its default, plausible range, how members draw it and its source."""

    name: str
    default: float
    low: float
    high: float
    unit: str
    distribution: str  # "uniform" or "log-uniform"
    meaning: str
    source: str

    def as_dict(self) -> dict:
        return {"default": self.default, "low": self.low, "high": self.high, "unit": self.unit,
                "distribution": self.distribution, "meaning": self.meaning, "source": self.source}


ASSUMPTIONS = (
    Assumption(
        "rh_threshold_shift", 0.0, -4.0, 4.0, "percent", "uniform",
        "the cloud RH thresholds of Zhang et al. (2010) (min, max and inter-layer tables, and liquid_rh when set) "
        "all shifted by this many percent RH: lower is a wetter reading of the sounding, more cloud",
        "Zhang et al. (2010), J. Geophys. Res. 115, D00K30, Table 1 (92-95 % near the ground) against the single "
        "thresholds of Wang and Rossow (1995), J. Appl. Meteor. 34, 2243-2258 (84 % moist, 87 % cloud, from "
        "memory): published threshold sets differ by several percent; +-4 % spans about half that gap each way"),
    Assumption(
        "lwc_factor", 1.0, 0.5, 2.0, "1", "log-uniform",
        "multiplier on the sub-adiabatic LWC (the Karstens et al. 1994 fraction of the adiabatic value, or the "
        "constant stratiform/convective factors when set), never above the adiabatic LWC; model cloud liquid is "
        "not scaled",
        "Karstens, Simmer and Ruprecht (1994), Meteorol. Atmos. Phys. 54, 157-171, a fit to Warner (1955) with "
        "much scatter; observed adiabaticity of layer cloud 0.6-0.9 (Wood 2012, Mon. Wea. Rev. 140, 2373-2423, "
        "from memory) against 0.24-0.57 of the profile 0.1-1 km above the base: a factor of two either way"),
    Assumption(
        "droplet_number_factor", 1.0, 0.5, 2.0, "1", "log-uniform",
        "multiplier on the airmass's droplet number concentration (icing.physics.microphysics.DROPLET_NUMBER or "
        "the number given); the MVD follows from LWC = (pi/6) rho_w N D^3, so it moves by the factor^(-1/3)",
        "Miles, Verlinde and Clothiaux (2000), J. Atmos. Sci. 57, 295-311: standard deviations about 60 % of the "
        "mean concentrations (marine 74 +- 45, continental 288 +- 159 per cm3, from memory); for supercooled "
        "stratiform cloud the diagnosis's derivation from Korolev et al. (2003, 2007) spans 155-270 per cm3 "
        "(icing.physics.microphysics.DROPLET_NUMBER): a factor of two either way covers both"),
    Assumption(
        "cold_limit_shift", 0.0, 0.0, 5.0, "K", "uniform",
        "the cold limit of supercooled liquid moved warmer by this many kelvin (with it the liquid fraction of "
        "Hu et al. 2010 falls to 0 at the warmer limit); the fraction's curve itself is not shifted",
        "homogeneous freezing of cloud droplets near -38 to -40 degC (facts of the trade); liquid water measured "
        "down to -37.5 degC only in strong updrafts (Rosenfeld and Woodley 2000, Nature 405, 440-442, from "
        "memory), so -35 degC is a plausible warmer limit for layer cloud"),
    Assumption(
        "time_nearest", 0.0, 0.0, 1.0, "1", "uniform",
        "time interpolation between two reports of a station: 0 linear in time (the chain's default), 1 the "
        "report nearest in time alone, in between a blend of the two; a member at 1 treats each sounding time "
        "as the state near it (a time-lagged reading)",
        "common practice without a single published source: linear interpolation and nearest-report matching "
        "are both used when soundings are matched to a flight or an observation"),
    Assumption(
        "distance_power", 2.0, 1.0, 3.0, "1", "uniform",
        "power of inverse-distance weighting between stations (distance floored at 10 km)",
        "Shepard (1968), Proc. 23rd ACM National Conference, 517-524: inverse-distance weighting with power 2 "
        "is the common choice; powers 1-3 are in use (common practice)"),
)
_BY_NAME = {a.name: a for a in ASSUMPTIONS}


def assumption_table():
    """The assumptions as a DataFrame (one row each: default, low, high, unit, distribution, meaning, source)."""
    import pandas as pd

    return pd.DataFrame([{"assumption": a.name, **a.as_dict()} for a in ASSUMPTIONS])


def resolve_ranges(ranges=None) -> dict:
    """The (low, high) range of every assumption: the defaults of :data:`ASSUMPTIONS` replaced by ``ranges``.

    ``ranges`` maps an assumption's name to ``(low, high)``, or to ``0``/``None`` for no spread (the member
    keeps the default). Raises :class:`ConfigError` for an unknown name or an unusable range.
    """
    out = {a.name: (a.low, a.high) for a in ASSUMPTIONS}
    for name, value in dict(ranges or {}).items():
        if name not in _BY_NAME:
            raise ConfigError(f"unknown spread assumption {name!r}; known: {', '.join(_BY_NAME)}")
        a = _BY_NAME[name]
        if value is None or (np.isscalar(value) and float(value) == 0.0):
            out[name] = (a.default, a.default)
            continue
        try:
            low, high = (float(v) for v in value)
        except (TypeError, ValueError):
            raise ConfigError(f"spread range of {name!r} must be (low, high) or 0, not {value!r}") from None
        if not (np.isfinite(low) and np.isfinite(high) and low <= high):
            raise ConfigError(f"spread range of {name!r} must be finite with low <= high, not {value!r}")
        if a.distribution == "log-uniform" and low <= 0:
            raise ConfigError(f"spread range of {name!r} is a factor: it must be positive, not {value!r}")
        if name == "time_nearest" and not (0.0 <= low and high <= 1.0):
            raise ConfigError(f"spread range of 'time_nearest' must lie within 0-1, not {value!r}")
        if name == "distance_power" and low < 0:
            raise ConfigError(f"spread range of 'distance_power' must not be negative, not {value!r}")
        out[name] = (low, high)
    return out


def draw_members(members=30, seed=0, ranges=None) -> dict:
    """Each assumption's value for every member: a Latin hypercube in the ranges (see the module notes).

    Returns a dict of name -> ndarray (members,); an assumption with a zero range holds its value throughout.
    """
    m = _check_members(members)
    rng = np.random.default_rng(_check_seed(seed))
    bounds = resolve_ranges(ranges)
    out = {}
    for a in ASSUMPTIONS:  # a fixed order, so a seed always gives the same members
        low, high = bounds[a.name]
        u = (rng.permutation(m) + rng.uniform(size=m)) / m
        if low == high:
            out[a.name] = np.full(m, low)
        elif a.distribution == "log-uniform":
            out[a.name] = np.exp(np.log(low) + u * (np.log(high) - np.log(low)))
        else:
            out[a.name] = low + u * (high - low)
    return out


def _check_members(members):
    if isinstance(members, bool) or not isinstance(members, int | np.integer) or members < 1:
        raise ConfigError(f"members must be a whole number of at least 1, not {members!r}")
    return int(members)


def _check_seed(seed):
    if isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0:
        raise ConfigError(f"seed must be a whole number of at least 0, not {seed!r}")
    return int(seed)


# --- matching weights of a member ------------------------------------------------------------------------------

def _sites(source):
    """Site number of each profile (station and position), as the source groups them."""
    keys = [f"{s}@{a:.3f},{b:.3f}" for s, a, b in zip(source.station, source.latitude, source.longitude,
                                                      strict=True)]
    return np.unique(keys, return_inverse=True)[1]


def member_weights(weights, distances, sites, *, distance_power=2.0, time_nearest=0.0):
    """A member's matching weights from the source's own (:meth:`SoundingSource.weights`), re-weighted.

    Parameters
    ----------
    weights, distances : ndarray (samples, profiles)
        The source's weights (rows sum to 1 where covered) and distances (m).
    sites : ndarray (profiles,)
        Site number of each profile (reports of one station share one).
    distance_power : float
        Inverse-distance power; the source's is 2, so each weight is multiplied by the floored distance to the
        power 2 - ``distance_power`` and the row normalised again. The stations used stay the same.
    time_nearest : float
        0 keeps the linear time weights; 1 gives each station's whole weight to its report with the larger
        linear weight (the nearer in time; the earlier on a tie); in between a blend.

    Returns
    -------
    ndarray (samples, profiles)
        Equal to ``weights`` (the same array) for the defaults.
    """
    w = weights
    if distance_power != DISTANCE_POWER:
        w = w * np.maximum(distances, DISTANCE_FLOOR_M) ** (DISTANCE_POWER - distance_power)
    if time_nearest != 0.0:
        near = np.zeros_like(w)
        rows = np.arange(w.shape[0])
        for s in np.unique(sites):
            cols = np.flatnonzero(sites == s)
            part = w[:, cols]
            near[rows, cols[np.argmax(part, axis=1)]] = part.sum(axis=1)
        w = (1.0 - time_nearest) * w + time_nearest * near
    if w is not weights:
        tot = w.sum(axis=1, keepdims=True)
        w = np.where(tot > 0, w / np.where(tot > 0, tot, 1.0), 0.0)
    return w


# --- diagnosis of a member ------------------------------------------------------------------------------------

class _MemberSource(SoundingSource):
    """A sounding source sharing a base source's soundings and matching, with a member's diagnostics.

    Built without :class:`SoundingSource`'s constructor (nothing is re-read, re-stacked or re-matched); its
    columns are prepared from the member's fields by the parent class. Winds are not sampled by members (the
    ground speed is the deterministic run's).
    """

    def __init__(self, base, fields):  # noqa: D107 - the parent's constructor is deliberately not called
        self.__dict__.update(base.__dict__)
        self.profiles = {}
        self.diagnostics = fields
        self._prepare_columns()


class _Fields(dict):
    """A member's diagnosed fields (profile, level) as plain arrays, read like a Dataset by the source's
    columns; any field the member does not change is the source's own (every field the source reads)."""

    def __init__(self, arrays, base):
        super().__init__({k: SimpleNamespace(values=v) for k, v in arrays.items()})
        self.base = base
        self.sizes = {"profile": base.sizes["profile"]}

    def __missing__(self, name):
        value = SimpleNamespace(values=self.base[name].values)
        self[name] = value
        return value

    def __contains__(self, name):
        return dict.__contains__(self, name) or name in self.base


def _cold_limit_k(value):
    if hasattr(value, "to"):  # a pint Quantity
        return float(value.to("K").magnitude)
    return float(value) + thermo.T0


def _base_options(source, options):
    """The diagnosis options of the source: its cold limit and airmass as its diagnostics record them, and the
    cloud thresholds given to assess_route (or kept by the source as ``diagnose_options``); without either the
    thresholds are taken as published, and a note says so."""
    attrs = source.diagnostics.attrs
    opts = {"cold_limit": float(attrs.get("cold_limit", -40.0))}
    airmass = attrs.get("airmass")
    if airmass is not None:
        try:
            opts["airmass"] = float(airmass)
        except ValueError:
            opts["airmass"] = str(airmass)
    given = options if options is not None else getattr(source, "diagnose_options", None)
    if given is None:
        return opts, ["the source was built beforehand: its cold limit and airmass are read back from its "
                      "diagnostics and the cloud thresholds taken as published"]
    opts.update({k: v for k, v in dict(given).items() if v is not None and k not in ("cold_limit", "airmass")})
    return opts, []


class _Diagnoser:
    """Re-diagnoses the source's soundings for members: one kernel call per distinct threshold setting."""

    def __init__(self, source, options):
        from icing.units import dataarray_to_unit

        self.source = source
        opts = dict(options)
        cold = opts.pop("cold_limit", None)
        self.cold_limit = _cold_limit_k(-40.0 if cold is None else cold)  # degC as in assess_route
        # the source's diagnostics record their airmass; the fallback is the diagnosis's own default
        self.airmass = opts.pop("airmass", None) or microphysics.DEFAULT_AIRMASS
        self.thresholds = {k: v for k, v in opts.items() if k in cloud.CLOUD_DEFAULTS and v is not None}
        self.n_drop = microphysics.droplet_number_concentration(self.airmass)
        prof = source.profiles
        self.inputs = [np.asarray(dataarray_to_unit(prof[n], u).transpose("profile", "level").values, dtype=float)
                       for n, u in (("pressure", "Pa"), ("temperature", "K"), ("dewpoint", "K"), ("height", "m"))]
        self.model_liquid = None
        if "cloud_liquid" in prof and bool(np.isfinite(prof["cloud_liquid"]).any()):
            cl = np.asarray(dataarray_to_unit(prof["cloud_liquid"], "kg/m^3").transpose("profile", "level").values,
                            dtype=float)
            self.inputs.append(cl)
            self.model_liquid = np.isfinite(cl)
        d = source.diagnostics
        # the level fields a member's diagnosis replaces: every kernel output the source's diagnostics hold
        self.levels = {k for k in d.data_vars if d[k].dims == ("profile", "level")}
        self.diagnostics = d
        self._cache = {}

    def _settings(self, shift):
        th = dict(self.thresholds)
        if shift:
            for name in ("min_rh", "max_rh", "inter_rh"):
                th[name] = tuple(float(v) + shift for v in th.get(name, cloud.CLOUD_DEFAULTS[name]))
            if th.get("liquid_rh") is not None:
                th["liquid_rh"] = float(th["liquid_rh"]) + shift
        return th

    def _run(self, shift, cold_shift, number_factor=1.0, adiabatic=False):
        key = (shift, cold_shift, number_factor, adiabatic)
        if key not in self._cache:
            from icing.physics.diagnose import diagnose_arrays

            th = self._settings(shift)
            if adiabatic:  # the adiabatic LWC (times the liquid fraction): the cap of a member's LWC
                th.update(stratiform_factor=1.0, convective_factor=1.0)
            cold = min(self.cold_limit + cold_shift, thermo.T0 - 0.1)
            # the member's droplet number (per cm3) reaches the kernel's warm-rain (drizzle) criterion too
            airmass = self.airmass if number_factor == 1.0 else self.n_drop * number_factor / 1e6
            self._cache[key] = diagnose_arrays(*self.inputs, cold_limit=cold, airmass=airmass, threads=1, **th)
        return self._cache[key]

    def fields(self, shift=0.0, cold_shift=0.0, lwc_factor=1.0, number_factor=1.0):
        """The fields a source samples, for one member's assumptions."""
        if shift == 0.0 and cold_shift == 0.0 and number_factor == 1.0:
            out = {}  # the source's own diagnosis: the deterministic answer, bit for bit
        else:
            d = self._run(shift, cold_shift, number_factor)
            out = {k: v for k, v in d.items() if k in self.levels}
        if lwc_factor != 1.0 or number_factor != 1.0:
            lwc = np.asarray(out["lwc"] if "lwc" in out else self.diagnostics["lwc"].values, dtype=float)
            if lwc_factor > 1.0:  # held to the adiabatic value (a factor below 1 cannot pass it)
                cap = self._run(shift, cold_shift, number_factor, adiabatic=True)["lwc"]
                scaled = np.minimum(lwc * lwc_factor, cap)
            else:
                scaled = lwc * lwc_factor
            if lwc_factor != 1.0:
                if self.model_liquid is not None:
                    scaled = np.where(self.model_liquid, lwc, scaled)
                lwc = np.where(np.isfinite(lwc), scaled, lwc)
            with np.errstate(invalid="ignore"):  # the airmass's own spectral shape with the member's number
                mvd = microphysics.median_volume_diameter(
                    np.where(np.isfinite(lwc), lwc, 0.0) / 1000.0, self.airmass,
                    number_concentration=self.n_drop * number_factor) * 1e6
            out["lwc"] = lwc
            out["mvd"] = mvd
        return _Fields(out, self.diagnostics)


# --- a model ensemble ------------------------------------------------------------------------------------------

class ModelEnsemble:
    """A model file (or Dataset) with an ensemble-member dimension as an atmosphere source.

    Each member is read as its own :class:`icing.flight.gridsource.GridSource` (the same reading, checks and
    diagnosis as a single model file). As a source it samples the first member (the control in the usual
    numbering; ``summary["notes"]`` of a screening does not change); with ``assess_route(..., spread=True)`` every
    member is one member of the ensemble.

    Parameters
    ----------
    model : path or xarray.Dataset
        A netCDF file (CF names, as :func:`icing.io.model.read_model` reads) or a Dataset already opened (e.g.
        GRIB through cfgrib), whose fields have a member dimension.
    member_dim : str, optional
        Its name; by default the first of :data:`MEMBER_DIMS` present.
    options :
        Passed to each :class:`~icing.flight.gridsource.GridSource` (``cold_limit``, ``airmass``, thresholds,
        ``time_tolerance_hours``).
    """

    kind = "model ensemble"

    def __init__(self, model, *, member_dim=None, **options):
        import xarray as xr

        from icing.errors import SoundingFormatError
        from icing.flight.gridsource import GridSource
        from icing.io.model import normalise_model

        name = ""
        if isinstance(model, str | Path):
            name = str(model)
            if not Path(model).exists():
                raise SoundingFormatError("no such model file", file=model)
            model = xr.open_dataset(model).load()
        dim = member_dim or next((d for d in MEMBER_DIMS if d in model.dims), None)
        if dim is None or dim not in model.dims:
            raise ConfigError(f"{name or 'the model'} has no ensemble-member dimension (looked for "
                              f"{member_dim or ', '.join(MEMBER_DIMS)}; it has {', '.join(map(str, model.dims))})")
        n = model.sizes[dim]
        values = model[dim].values if dim in model.coords else np.arange(n)
        self.member_dim = dim
        self.member_labels = [str(v) for v in values]
        name = name or str(model.attrs.get("source", "") or "")
        self.members = [GridSource(normalise_model(model.isel({dim: i}), source=name), **options)
                        for i in range(n)]
        control = self.members[0]
        self.labels, self.diagnostics, self.model = control.labels, control.diagnostics, control.model
        self.time_s = control.time_s
        self.notes = [f"model ensemble of {n} members ({dim} {', '.join(self.member_labels)}); a screening "
                      f"without spread samples the first, {dim} {self.member_labels[0]}"]

    def sample(self, latitude, longitude, time, pressure=None, height=None):
        """The first member's :meth:`~icing.flight.gridsource.GridSource.sample`."""
        return self.members[0].sample(latitude, longitude, time, pressure=pressure, height=height)


# --- the ensemble -----------------------------------------------------------------------------------------------

def _spearman(x, y):
    """Rank correlation of the columns of x (M, a) with the columns of y (M, b): (a, b), NaN without variance."""
    from scipy.stats import rankdata

    rx = rankdata(x, axis=0)
    ry = rankdata(y, axis=0)
    rx = rx - rx.mean(axis=0)
    ry = ry - ry.mean(axis=0)
    num = rx.T @ ry
    den = np.sqrt((rx * rx).sum(axis=0))[:, None] * np.sqrt((ry * ry).sum(axis=0))[None, :]
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / np.where(den > 0, den, 1.0), np.nan)


def _drivers(draws, accretion, codes):
    """Per column of accretion (M, n): the varied assumption with the largest absolute rank correlation."""
    names = [k for k, v in draws.items() if np.ptp(v) > 0]
    n = accretion.shape[1]
    out = np.full(n, "none", dtype=object)
    known = np.isfinite(accretion).all(axis=0)
    out[~known] = "unknown"
    if not names or accretion.shape[0] < 3:
        return out, {}
    x = np.column_stack([draws[k] for k in names])
    rho_acc = _spearman(x, np.nan_to_num(accretion))
    rho_code = _spearman(x, codes.astype(float))
    rho = np.where(np.isfinite(rho_acc), rho_acc, rho_code)  # (assumptions, n)
    score = np.where(np.isfinite(rho), np.abs(rho), -1.0)
    best = np.argmax(score, axis=0)
    moved = score[best, np.arange(n)] > 0
    out[known & moved] = np.asarray(names, dtype=object)[best][known & moved]
    return out, {k: rho[i] for i, k in enumerate(names)}


def route_spread(source, points, outcome, *, members=30, seed=0, ranges=None, options=None, weights=None):
    """The ensemble of one or many routes' samples (the hook of ``assess_route(spread=True)``).

    Parameters
    ----------
    source : icing.flight.sources.SoundingSource
    points : dict
        The trajectory samples at the planned altitude, as given to ``source.sample``: ``latitude``,
        ``longitude``, ``time`` (datetime64), ``pressure`` (Pa, NaN where a height is given), ``height`` (m).
    outcome : callable
        ``outcome(atmosphere, members) -> (codes, accretion)``: the deterministic chain's scoring of ``members``
        stacked sample runs, per segment (members, segments): intensity codes 0-4 (none to severe) and 5
        unknown, and accretion (mm, NaN where a segment has no data).
    members, seed, ranges :
        See :func:`draw_members`.
    options : dict, optional
        The diagnosis options the source was built with (``cold_limit``, ``airmass``, cloud thresholds); None
        reads them back from the source.
    weights : tuple, optional
        The source's ``(weights, distances)`` at the points, when already computed.

    Returns
    -------
    dict
        ``columns`` (the :data:`SPREAD_COLUMNS` per segment, arrays), ``codes`` and ``accretion`` (members,
        segments), ``draws`` (name -> values), ``ranges`` and ``notes``.
    """
    if isinstance(source, ModelEnsemble):
        return _model_spread(source, points, outcome)
    if not isinstance(source, SoundingSource):
        raise ConfigError("spread=True needs soundings (a SoundingSource) or a model ensemble (ModelEnsemble): "
                          "the assumptions it varies are those of the diagnosis from soundings, and a "
                          f"{type(source).__name__} is not spread yet")
    m = _check_members(members)
    bounds = resolve_ranges(ranges)
    draws = draw_members(m, seed, ranges)
    base, notes = _base_options(source, options)
    diag = _Diagnoser(source, base)
    lat = np.asarray(points["latitude"], dtype=float)
    lon = np.asarray(points["longitude"], dtype=float)
    times = np.asarray(points["time"]).astype("datetime64[s]")
    if weights is None:
        weights = source.weights(lat, lon, times.astype(np.int64).astype(float))
    w0, dist = weights
    sites = _sites(source)
    runs = []
    for i in range(m):
        fields = diag.fields(draws["rh_threshold_shift"][i], draws["cold_limit_shift"][i], draws["lwc_factor"][i],
                             draws["droplet_number_factor"][i])
        w = member_weights(w0, dist, sites, distance_power=draws["distance_power"][i],
                           time_nearest=draws["time_nearest"][i])
        runs.append(_MemberSource(source, fields).sample(lat, lon, times, pressure=points["pressure"],
                                                         height=points["height"], weights=(w, dist)))
    codes, accretion, cols = _score(runs, outcome)
    cols["spread_driver"], _ = _drivers(draws, accretion, codes)
    return {"columns": cols, "codes": codes, "accretion": accretion, "draws": draws, "ranges": bounds,
            "members": m, "seed": int(seed), "notes": notes}


def _score(runs, outcome):
    """Codes and accretion (members, segments) of the members' sample runs, and the shares and percentiles."""
    m = len(runs)
    atm = {k: np.concatenate([r[k] for r in runs]) for k in runs[0] if k != "used"}
    codes, accretion = outcome(atm, m)
    codes = np.asarray(codes).reshape(m, -1)
    accretion = np.asarray(accretion, dtype=float).reshape(m, -1)
    cols = {k: (codes >= lvl).mean(axis=0) for k, lvl in LEVELS.items()}  # unknown (5) counts at every level
    with np.errstate(invalid="ignore"):
        p10, p90 = np.percentile(accretion, [10.0, 90.0], axis=0)  # NaN where any member has no data
    cols["accretion_p10_mm"], cols["accretion_p90_mm"] = p10, p90
    return codes, accretion, cols


def _model_spread(source, points, outcome):
    """The members of a model ensemble, each sampled along the route: the ensemble as it stands."""
    runs = [g.sample(points["latitude"], points["longitude"], points["time"], pressure=points["pressure"],
                     height=points["height"]) for g in source.members]
    codes, accretion, cols = _score(runs, outcome)
    moved = (np.ptp(np.nan_to_num(accretion), axis=0) > 0) | (np.ptp(codes, axis=0) > 0)
    driver = np.where(moved, "model_member", "none").astype(object)
    driver[~np.isfinite(accretion).all(axis=0)] = "unknown"
    cols["spread_driver"] = driver
    return {"columns": cols, "codes": codes, "accretion": accretion, "draws": {}, "ranges": {},
            "members": len(runs), "seed": None, "model_members": list(source.member_labels),
            "notes": ["the members are the model's own ensemble members; the diagnosis's assumptions are not "
                      "varied on a model grid (members and seed are not used)"]}


def spread_summary(result, segments) -> dict:
    """The route-level ``summary["spread"]`` of the segments ``segments`` (a slice) of :func:`route_spread`.

    Route shares: the share of members whose worst segment is at that intensity or worse (a member with a
    segment without data counts as reaching every intensity); percentiles of each member's total accretion
    (unknown when any member has a segment without data); the driver of the total accretion.
    """
    codes = result["codes"][:, segments]
    acc = result["accretion"][:, segments]
    worst = codes.max(axis=1) if codes.size else np.zeros(result["members"], int)
    total = acc.sum(axis=1)  # NaN when any segment of that member has no data
    with np.errstate(invalid="ignore"):
        p10, p50, p90 = np.percentile(total, [10.0, 50.0, 90.0]) if total.size else (np.nan,) * 3
    if result["draws"]:
        driver, rho = _drivers(result["draws"], total[:, None], worst[:, None])
    else:  # a model ensemble: the members themselves are what varies
        moved = np.ptp(np.nan_to_num(total)) > 0 or np.ptp(worst) > 0
        driver, rho = np.array(["model_member" if moved else "none"], dtype=object), {}
    unknown = int((codes == UNKNOWN_CODE).any(axis=1).sum())
    return {
        "members": result["members"], "seed": result["seed"],
        "sampling": ("Latin hypercube (one draw per equal-probability stratum of each range, numpy default_rng"
                     "(seed)); log-uniform for factors") if result["draws"] else "the model's ensemble members",
        "assumptions": {a.name: {**a.as_dict(), "low": result["ranges"][a.name][0],
                                 "high": result["ranges"][a.name][1]} for a in ASSUMPTIONS
                        if a.name in result["ranges"]},
        **({"model_members": result["model_members"]} if "model_members" in result else {}),
        "p_light": float((worst >= LEVELS["p_light"]).mean()),
        "p_moderate": float((worst >= LEVELS["p_moderate"]).mean()),
        "p_severe": float((worst >= LEVELS["p_severe"]).mean()),
        "accretion_p10_mm": float(p10), "accretion_p50_mm": float(p50), "accretion_p90_mm": float(p90),
        "driver": str(driver[0]),
        "rank_correlations": {k: (None if not np.isfinite(v[0]) else float(v[0])) for k, v in rho.items()},
        "members_with_unknown": unknown,
        "unknown_rule": "a member without data at a segment counts as at every intensity or worse there; "
                        "accretion percentiles are unknown where any member has no data",
        "notes": list(result["notes"]),
        "caution": CAUTION,
    }
