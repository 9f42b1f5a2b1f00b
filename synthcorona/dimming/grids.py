"""Detection probability (and minimum detectable CME mass) over a grid of scenario parameters.

:func:`detection_grid` varies a base :class:`~synthcorona.dimming.scenario.DimmingScenario` over
the outer product of the given axes -- distance and interstellar column (the :class:`Star`),
exposure and bin width (the :class:`Observation`), instrument, and CME mass -- and evaluates
:meth:`DimmingScenario.detection_probability` at every grid point (a plain loop over grid points;
the Monte Carlo inside is vectorised over realisations). Every grid point uses the same ``seed``
(common random numbers), so P(detect) is reproducible and, with the inversion sampler of
:mod:`synthcorona.dimming.noise`, monotone along the mass axis.

With ``scheduler=`` the outer grid points (all axes but mass, which shares one scenario) are
evaluated as dask tasks, in chunks, on a local or remote cluster. A point's result depends
only on the base scenario, the point's axis values and ``seed`` -- never on the worker, the
chunk or the order in which points finish -- and results are placed by the point's index,
so the grid is the same number for number whatever runs it (``docs/distributed.md``).
"""
from __future__ import annotations

import dataclasses
import itertools
import math
import warnings

import astropy.units as u
import numpy as np
import xarray as xr

from ..errors import InputError
from ..validation import as_quantity

__all__ = ["detection_grid"]

_AXES = (("distance", u.pc, "pc"), ("nh", u.cm ** -2, "cm-2"), ("exposure", u.s, "s"), ("bin_width", u.s, "s"),
         ("mass", u.g, "g"))


def _axis(name, value, unit):
    q = as_quantity(name, value, unit)
    v = np.atleast_1d(np.asarray(q.value, dtype=float))
    if v.ndim != 1 or v.size < 1:
        raise InputError(f"{name} must be a 1-D list of values; got shape {v.shape}")
    if not np.all(np.isfinite(v)):
        raise InputError(f"{name}={v} contains NaN or infinite values")
    return v


def _instrument_label(x):
    from ..instruments.instrument import Instrument

    if isinstance(x, str):
        return x
    if isinstance(x, Instrument):
        return x.name
    if isinstance(x, tuple) and len(x) == 2:
        return f"{_instrument_label(x[0])}:{x[1]}"
    raise InputError(f"instrument entry {x!r} must be an Instrument, a generic name or (instrument, band)")


def _grid_point(recipe: dict, idx: tuple) -> dict:
    """P(detect), its error and the depth (mass, band) -- and the minimum mass -- at one outer grid point.

    ``recipe`` holds the base scenario's parts and the axes; ``idx`` the point's index on the
    outer axes. The result depends on ``recipe`` and ``idx`` only (every point uses the same
    ``seed``), so it is the same in whichever process and order the points are evaluated.
    """
    from .scenario import DimmingScenario

    outer, mass_vals, bands = recipe["outer"], recipe["mass_vals"], recipe["bands_eval"]
    vals = {n: recipe["outer_values"][n][i] for n, i in zip(outer, idx)}
    star_kw, obs_kw = {}, {}
    if "distance" in vals:
        star_kw["distance"] = vals["distance"] * u.pc
    if "nh" in vals:
        star_kw["nh"] = vals["nh"] * u.cm ** -2
    if "exposure" in vals:
        obs_kw["exposure"] = vals["exposure"] * u.s
    if "bin_width" in vals:
        obs_kw["bin_width"] = vals["bin_width"] * u.s
    star = dataclasses.replace(recipe["star"], **star_kw) if star_kw else recipe["star"]
    obs = dataclasses.replace(recipe["observation"], **obs_kw) if obs_kw else recipe["observation"]
    if "instrument" in vals:
        inst = vals["instrument"]
    else:
        inst = {lab: (ins, b) for lab, ins, b in recipe["bands"]}
    # the scenario's own mass must be removable at every point: build it with the smallest mass
    cme = dataclasses.replace(recipe["cme"], mass=float(mass_vals.min()) * u.g)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sc = DimmingScenario(star, recipe["corona"], cme, recipe["flare"], inst, obs, recovery=recipe["recovery"],
                             upflow_fraction=recipe["upflow_fraction"], table=recipe["table"])
    if bands is None and len(sc.labels) != 1:
        raise InputError(f"instrument entry {inst!r} gives bands {sc.labels}; on the instrument axis give "
                         "(instrument, band) so that each entry has one band")
    nb = 1 if bands is None else len(bands)
    prob = np.full((mass_vals.size, nb), np.nan)
    perr = np.full_like(prob, np.nan)
    depth = np.full_like(prob, np.nan)
    seed, statistic, n_real = recipe["seed"], recipe["statistic"], recipe["n_realisations"]
    for k, m in enumerate(mass_vals):
        blist = [None] if bands is None else bands
        for j, b in enumerate(blist):
            ds = sc.detection_probability(n_real, statistic=statistic, seed=seed,
                                          band=b if b is not None else sc.labels[0], mass=m * u.g)
            prob[k, j] = float(ds["probability"].values[0])
            perr[k, j] = float(ds["probability_error"].values[0])
            bi = sc.labels.index(b if b is not None else sc.labels[0])
            depth[k, j] = float(sc.depths_for(m)[bi])
    out = {"idx": tuple(idx), "prob": prob, "perr": perr, "depth": depth,
           "mmin": np.nan, "mmin_err": np.nan, "mmin_band": "", "note": ""}
    if recipe["min_mass"]:
        try:
            res = sc.minimum_detectable_mass(recipe["target_probability"], bracket=recipe["bracket"],
                                             band=recipe["band"], statistic=statistic, n_realisations=n_real,
                                             seed=seed)
            out.update(mmin=float(res["mass"]), mmin_err=float(res["mass_error"]), mmin_band=res.attrs["band"])
        except InputError as exc:
            out["note"] = f"{dict(zip(outer, [str(v) for v in vals.values()]))}: {exc}"
    return out


class _Recipe:
    """Holder of a grid recipe sent to the workers as one pickled object (dask would otherwise
    serialise the dict's values one by one and strip the units of Quantity values)."""

    def __init__(self, recipe: dict):
        self.recipe = recipe


def _grid_chunk(holder: _Recipe, idxs: list) -> list:
    """:func:`_grid_point` for a chunk of outer grid points (one dask task)."""
    return [_grid_point(holder.recipe, idx) for idx in idxs]


def _portable(x):
    """A copy of an instrument entry that can be sent to worker processes (response caches left behind)."""
    from ..instruments.instrument import Instrument

    if isinstance(x, Instrument):
        return x.without_caches()
    if isinstance(x, tuple):
        return tuple(_portable(v) for v in x)
    return x


def _grid_distributed(recipe: dict, points: list, scheduler, n_workers, chunk_size, progress: bool):
    """Evaluate the grid points as dask tasks of ``chunk_size`` points; yields point results as they finish.

    The recipe (the base scenario's parts, instruments without their caches) is sent to the
    workers once (``Client.scatter``, broadcast); the default chunk size gives about four
    chunks per worker.
    """
    from distributed import as_completed
    from tqdm.auto import tqdm

    from ..cluster import dask_client, n_workers_of

    recipe = dict(recipe)
    recipe["bands"] = [(lab, _portable(ins), b) for lab, ins, b in recipe["bands"]]
    if "instrument" in recipe["outer_values"]:
        recipe["outer_values"] = dict(recipe["outer_values"])
        recipe["outer_values"]["instrument"] = [_portable(x) for x in recipe["outer_values"]["instrument"]]
    with dask_client(scheduler, n_workers=n_workers) as client:
        size = chunk_size or max(1, math.ceil(len(points) / (4 * n_workers_of(client))))
        chunks = [points[i:i + size] for i in range(0, len(points), size)]
        remote = client.scatter(_Recipe(recipe), broadcast=True, hash=False)
        futs = client.map(_grid_chunk, [remote] * len(chunks), chunks, pure=False)
        with tqdm(total=len(points), disable=not progress, desc="detection grid") as bar:
            for fut in as_completed(futs):
                part = fut.result()
                fut.release()
                bar.update(len(part))
                yield from part


def detection_grid(base_scenario, distance=None, nh=None, exposure=None, bin_width=None, mass=None, instrument=None,
                   n_realisations: int = 2000, seed=0, statistic: str = "window", band=None, min_mass: bool = False,
                   target_probability: float = 0.5, bracket=(1e13 * u.g, 1e18 * u.g), progress: bool = False,
                   scheduler=None, n_workers: int | None = None, chunk_size: int | None = None) -> xr.Dataset:
    """P(detect) over the outer product of the given parameter axes.

    Parameters
    ----------
    base_scenario : DimmingScenario
        Everything not on an axis is taken from it (its star, corona, CME, flare, instruments,
        observation, recovery model, emissivity table).
    distance, nh, exposure, bin_width, mass : Quantity (1-D or scalar), optional
        Axes; each given one becomes a dimension of the result (in that order). ``exposure``
        and ``bin_width`` keep the base observation's ``pre_event``.
    instrument : list of Instrument / generic name / (instrument, band), optional
        Instrument axis (coordinate: names). Each entry must give a single band.
    n_realisations, seed, statistic
        As for :meth:`DimmingScenario.detection_probability`; the same seed at every grid point.
    band : str, optional
        Evaluate only this band label of the base scenario (default: all its bands, a ``band``
        dimension). With an instrument axis each entry has one band and there is no band dimension.
    min_mass : bool
        Also compute the minimum detectable mass (:meth:`DimmingScenario.minimum_detectable_mass`)
        at ``target_probability`` within ``bracket`` for every non-mass grid point, in the
        scenario's best band (or ``band``); NaN where the bracket does not straddle the target
        (``attrs["min_mass_notes"]`` says where).
    progress : bool
        Show a tqdm progress bar.
    scheduler : None, "local", address or distributed.Client
        None (default): evaluate the grid points one after another in this process. Otherwise the
        points run as dask tasks in chunks (see :mod:`synthcorona.cluster`): ``"local"`` starts a
        local cluster of ``n_workers`` processes (default: one per CPU core) for this call, an
        address (``"tcp://host:8786"``) or a ``Client`` uses a running cluster. The numbers do not
        depend on this choice, the number of workers or ``chunk_size``.
    n_workers : int, optional
        Worker processes of a ``"local"`` cluster.
    chunk_size : int, optional
        Outer grid points per task (default: about four tasks per worker).

    Returns
    -------
    xarray.Dataset
        With ``probability`` and ``probability_error`` over the axis dims (+ ``band``
        without an instrument axis), ``depth`` (fractional count-rate depth at each point), and with
        ``min_mass=True`` ``minimum_detectable_mass`` and ``minimum_detectable_mass_error`` [g] over
        the non-mass dims. Coordinates carry units attrs.
    """
    from tqdm.auto import tqdm

    from .scenario import DimmingScenario

    if not isinstance(base_scenario, DimmingScenario):
        raise InputError(f"base_scenario={base_scenario!r} must be a DimmingScenario")
    n_realisations = int(n_realisations)
    axes, inst_list = _grid_axes(dict(distance=distance, nh=nh, exposure=exposure, bin_width=bin_width, mass=mass),
                                 instrument)
    base = base_scenario
    outer = [n for n in ("distance", "nh", "exposure", "bin_width") if n in axes]
    if inst_list is not None:
        outer.append("instrument")
    mass_vals = axes["mass"][0] if "mass" in axes else np.array([float(base.cme.mass.to_value(u.g))])
    outer_values = {n: inst_list if n == "instrument" else axes[n][0] for n in outer}
    shape_outer = [len(outer_values[n]) for n in outer]
    if inst_list is None:
        bands = [band] if band is not None else list(base.labels)
        if band is not None:
            base.band_index(band)
    else:
        bands = None

    points = list(itertools.product(*[range(s) for s in shape_outer]))
    recipe = {"star": base.star, "corona": base.corona, "cme": base.cme, "flare": base.flare,
              "observation": base.observation, "recovery": base.recovery, "upflow_fraction": base.upflow_fraction,
              # the base scenario's table, by its file where it has one (sent to workers as a path)
              "table": base.table.path if base.table.path is not None else base.table,
              "bands": [(lab, ins, b) for lab, ins, b in base.channels], "outer": outer,
              "outer_values": outer_values, "mass_vals": mass_vals, "bands_eval": bands,
              "n_realisations": n_realisations, "statistic": statistic, "seed": seed, "min_mass": bool(min_mass),
              "target_probability": target_probability, "bracket": bracket, "band": band}
    if scheduler is None:
        results = (_grid_point(recipe, idx) for idx in points)
        results = tqdm(results, total=len(points), disable=not progress, desc="detection grid")
    else:
        results = _grid_distributed(recipe, points, scheduler, n_workers, chunk_size, progress)
    arrays = _collect(results, shape_outer, mass_vals.size, 1 if bands is None else len(bands), min_mass)
    ds = _grid_dataset(base, arrays, axes, outer, inst_list, mass_vals, bands, recipe)
    if "mass" not in axes:
        ds = ds.isel(mass=0)
    return ds


def _grid_axes(given: dict, instrument):
    """The given axes, name -> (values, unit label), and the instrument entries (None without an instrument axis)."""
    axes = {}
    for name, unit, label in _AXES:
        if given[name] is not None:
            axes[name] = (_axis(name, given[name], unit), label)
    inst_list = None
    if instrument is not None:
        inst_list = list(instrument) if isinstance(instrument, (list, tuple)) and not (
            isinstance(instrument, tuple) and len(instrument) == 2 and isinstance(instrument[1], str)) else [instrument]
        for x in inst_list:
            _instrument_label(x)
    return axes, inst_list


def _collect(results, shape_outer, n_mass, nb, min_mass) -> dict:
    """The point results gathered into arrays over the outer axes (+ mass, band); notes in grid order."""
    prob = np.full(shape_outer + [n_mass, nb], np.nan)
    out = {"prob": prob, "perr": np.full_like(prob, np.nan), "depth": np.full_like(prob, np.nan),
           "mmin": np.full(shape_outer, np.nan), "mmin_err": np.full(shape_outer, np.nan),
           "mmin_band": np.empty(shape_outer, dtype=object)}
    notes = []
    for res in results:
        idx = res["idx"]
        for key in ("prob", "perr", "depth"):
            out[key][idx] = res[key]
        if min_mass:
            for key in ("mmin", "mmin_err", "mmin_band"):
                out[key][idx] = res[key]
            if res["note"]:
                notes.append((idx, res["note"]))
    out["notes"] = [n for _, n in sorted(notes)]   # grid order, whatever order the points finished in
    return out


def _grid_dataset(base, arrays, axes, outer, inst_list, mass_vals, bands, recipe) -> xr.Dataset:
    """The result Dataset of :func:`detection_grid` (with a ``mass`` dimension)."""
    prob, perr, depth = arrays["prob"], arrays["perr"], arrays["depth"]
    dims = list(outer) + ["mass"] + ([] if bands is None else ["band"])
    if bands is None:
        prob, perr, depth = prob[..., 0], perr[..., 0], depth[..., 0]
    coords = {}
    for n in outer:
        if n == "instrument":
            coords["instrument"] = [_instrument_label(x) for x in inst_list]
        else:
            coords[n] = (n, axes[n][0], {"units": axes[n][1]})
    coords["mass"] = ("mass", mass_vals, {"units": "g"})
    if bands is not None:
        coords["band"] = bands
    data = {
        "probability": (dims, prob, {"units": "1", "long_name": "P(detect) at the false-alarm probability"}),
        "probability_error": (dims, perr, {"units": "1", "long_name": "binomial Monte Carlo error"}),
        "depth": (dims, depth, {"units": "1", "long_name": "full fractional count-rate depth"}),
    }
    min_mass, target_probability = recipe["min_mass"], recipe["target_probability"]
    if min_mass:
        data["minimum_detectable_mass"] = (outer, arrays["mmin"], {
            "units": "g", "long_name": f"mass where P(detect) = {target_probability:g}"})
        data["minimum_detectable_mass_error"] = (outer, arrays["mmin_err"], {"units": "g"})
        data["minimum_detectable_mass_band"] = (outer, arrays["mmin_band"].astype(str))
    attrs = {
        "statistic": recipe["statistic"], "n_realisations": recipe["n_realisations"], "seed": str(recipe["seed"]),
        "false_alarm": float(base.observation.false_alarm),
        "base_instruments": str(base.result_attrs()["instruments"]),
        "abundances": str(base.corona.abundances),
        "source_density_cm-3": float(base.prepared.source.density),
        "source_temperature_K": float(base.cme.source_temperature.to_value(u.K)),
        "method": ("P(detect) by injection/recovery at every grid point "
                   "(DimmingScenario.detection_probability), same seed everywhere (synthcorona.dimming.grids)"),
    }
    if min_mass:
        attrs["target_probability"] = float(target_probability)
        attrs["min_mass_bracket_g"] = [float(as_quantity("bracket", b, u.g).value) for b in recipe["bracket"]]
        attrs["min_mass_notes"] = "; ".join(arrays["notes"]) if arrays["notes"] else "all grid points bracketed"
    return xr.Dataset(data, coords=coords, attrs=attrs)
