"""Forecast scenario files: a TOML description of a CME-dimming forecast -> :class:`ForecastInputs`.

:func:`read_forecast_file` reads the tables ``[scenario]``, ``[star]``, ``[corona]`` (with
``[corona.dem]``), ``[cme]``, ``[flare]`` (optional), ``[[instrument]]`` (one or more),
``[observation]``, ``[variability]`` (optional), ``[montecarlo]`` and ``[output]`` (optional), checks every key (type, unit,
range; unknown keys refused) with :class:`synthcorona.io.toml.Section`, and builds the
:class:`~synthcorona.dimming.scenario.DimmingScenario` of the forecast. Every key, unit,
default and valid range is documented in ``docs/scenario_reference.md``.

A flare may be given by its soft-X-ray class (``class = "M2.5"``): the letter gives the decade of
the peak 1-8 Angstrom flux at 1 AU from the star, the number multiplies it (A 1e-8, B 1e-7,
C 1e-6, M 1e-5, X 1e-4 W m-2, true scale; the standard solar classification). The scenario then
sets the flare up so that its own peak 1-8 Angstrom flux is the class flux
(:mod:`synthcorona.dimming.flare_class`; :func:`flare_energy_from_class` gives the heating energy of
the default strands).
"""
from __future__ import annotations

import dataclasses
import pathlib
import unicodedata
import warnings
from dataclasses import dataclass
from typing import Any

import astropy.units as u
import numpy as np

from ..dimming.flare_energy import FLARE_CLASS_FLUX, flare_energy_from_class
from ..errors import InputError, ScenarioError
from .toml import Section, abundances_from_key, dem_from_section, load_toml, read_input_text

__all__ = ["ForecastInputs", "MonteCarlo", "InstrumentEntry", "read_forecast_file", "flare_energy_from_class",
           "FLARE_CLASS_FLUX", "STATISTICS", "VARIABILITY_RANGES", "ONE_LINE_KEYS", "check_text_values", "ONSETS"]

#: Detection statistics of :meth:`DimmingScenario.detection_probability`.
STATISTICS = ("window", "likelihood")

#: Keys whose text is one line (titles, names, labels): no control character at all (:func:`check_text_values`).
ONE_LINE_KEYS = ("title", "name", "label")


def check_text_values(root: Section) -> None:
    """Refuse control characters in the text of an input file: none at all in the keys of
    :data:`ONE_LINE_KEYS` (titles, names, labels are one line of printable text), none but tab and line
    breaks anywhere else (a description may span lines). The text goes into the attributes of the
    netCDF files, which cannot hold a NUL, and into one-line terminal output; checked before any
    computation. Raises :class:`~synthcorona.errors.ScenarioError` naming the file, the table and the key."""

    def check(path: str, shown: str, key: str, text: str) -> None:
        allowed = "" if key in ONE_LINE_KEYS else "\t\n\r"
        pos = next((i for i, c in enumerate(text) if unicodedata.category(c) == "Cc" and c not in allowed), None)
        if pos is None:
            return
        sect = f"[{path}] " if path else ""
        rule = ("a title, name or label is one line of printable text" if key in ONE_LINE_KEYS
                else "text may hold tabs and line breaks but no other control characters")
        raise ScenarioError(f"{root.file}: {sect}{shown}: contains the control character U+{ord(text[pos]):04X} "
                            f"(character {pos + 1}); {rule}", argument=key)

    def walk(data: dict, path: str) -> None:
        for key, val in data.items():
            child = f"{path}.{key}" if path else key
            if isinstance(val, dict):
                walk(val, child)
            elif isinstance(val, str):
                check(path, key, key, val)
            elif isinstance(val, list):
                for i, item in enumerate(val):
                    if isinstance(item, dict):
                        walk(item, f"{child}[{i}]")
                    elif isinstance(item, str):
                        check(path, f"{key}[{i}]", key, item)

    walk(root.data, root.path)






#: Onset options of the detection (:meth:`DimmingScenario.detection_probability`): scanned or known.
ONSETS = ("scan", "known")


@dataclass(frozen=True)
class MonteCarlo:
    """Monte Carlo settings: ``realisations`` per probability, ``seed``, ``statistic``, ``onset`` ("scan" or
    "known") and ``precision``, the standard error of P(detect) the realisations were sized for (None when
    the file gives ``realisations``)."""

    realisations: int = 2000
    seed: int = 0
    statistic: str = "window"
    onset: str = "scan"
    precision: float | None = None


@dataclass(frozen=True)
class InstrumentEntry:
    """One ``[[instrument]]`` table: the instrument, the bands used and how it was defined."""

    instrument: Any
    bands: tuple
    source: str


@dataclass(frozen=True)
class ForecastInputs:
    """Everything a forecast scenario file defines.

    ``instrument`` is the spec passed to :class:`DimmingScenario` (dict band label ->
    (Instrument, band name)); ``instruments`` the ``[[instrument]]`` entries; ``mass_grid`` the
    CME masses [g] of P(detect) vs mass; ``raw_text``/``raw`` the file as read.
    """

    scenario: Any
    star: Any
    corona: Any
    cme: Any
    flare: Any
    observation: Any
    instrument: dict
    instruments: tuple
    montecarlo: MonteCarlo
    mass_grid: u.Quantity
    target_probability: float
    title: str
    description: str
    source: str
    raw_text: str
    raw: dict
    recovery: Any = "refill"
    upflow_fraction: float = 0.05
    output: dict = dataclasses.field(default_factory=dict)
    flare_class: str | None = None
    star_name: str | None = None

    def build_scenario(self, *, table=None, **changes):
        """A new :class:`DimmingScenario` from these inputs with fields replaced (``star=``, ``corona=``, ...).

        ``table``: emissivity table of the scenario (an EmissivityTable or a path; default: see
        :func:`synthcorona.emissivity.resolve_table`).
        """
        from ..dimming.scenario import DimmingScenario

        kw = dict(star=self.star, corona=self.corona, cme=self.cme, flare=self.flare, instrument=self.instrument,
                  observation=self.observation, recovery=self.recovery, upflow_fraction=self.upflow_fraction)
        kw.update(changes)
        obs = kw.pop("observation")
        return DimmingScenario(kw.pop("star"), kw.pop("corona"), kw.pop("cme"), kw.pop("flare"), kw.pop("instrument"),
                               obs, table=table, **kw)

    def with_scenario(self, table=None) -> "ForecastInputs":
        """These inputs with ``scenario`` built on ``table`` (:meth:`build_scenario`) and ``flare`` replaced by
        the flare as run (:attr:`DimmingScenario.resolved_flare`: heating energy and strand count explicit,
        so a class is resolved to its energy; ``flare_class`` keeps the file's class); a mistake the
        scenario finds (e.g. a CME mass above what the corona holds) raises a :class:`ScenarioError`
        naming the file and the table it belongs to."""
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            scenario = _wrap(Section({}, "", self.source), None, self.build_scenario, table=table)
        flare = self.flare if scenario.resolved_flare is None else scenario.resolved_flare
        return dataclasses.replace(self, scenario=scenario, flare=flare)


# ----------------------------------------------------------------------------- sections
#: Which table a DimmingScenario complaint about ``<argument>=`` belongs to.
_OWNER = {"mass": "[cme] mass", "distance": "[star] distance", "density": "[corona] density",
          "background": "[observation] background", "band": "[[instrument]] bands",
          "escape_fraction": "[cme] escape_fraction", "times": "[observation]"}


def _wrap(sec: Section, key: str | None, fn, *args, **kwargs):
    """Call ``fn``; an :class:`InputError` from it becomes a ScenarioError naming the file and table (at the
    top level, the table of the error's :attr:`~synthcorona.errors.InputError.argument`)."""
    try:
        return fn(*args, **kwargs)
    except ScenarioError:
        raise
    except InputError as exc:
        where = sec.where(key).rstrip(":")
        if not sec.path and key is None and exc.argument in _OWNER:
            where = f"{sec.file}: {_OWNER[exc.argument]}"
        raise ScenarioError(f"{where}: {exc}") from None


def read_star(root: Section):
    """The ``[star]`` table (distance, nh, radius, name) -> (:class:`~synthcorona.dimming.scenario.Star`, name).

    Shared by forecast scenario files and activity-cycle files."""
    from ..dimming.scenario import Star

    s = root.section("star", required=True)
    name = s.string("name", default=None)
    dist = s.quantity("distance", u.pc, required=True, lo=0.0, lo_inclusive=False, hi=1e4)
    nh = s.quantity("nh", u.cm ** -2, default=None, lo=0.0, hi=1e24)
    radius = s.quantity("radius", u.R_sun, default=None, lo=0.0, lo_inclusive=False, hi=1e4)
    s.finish()
    return _wrap(s, None, Star, distance=dist, nh=nh, radius=radius), name


def _corona(root: Section):
    from ..dimming.scenario import Corona

    c = root.section("corona", required=True)
    abund = abundances_from_key(c, "abundances", default="coronal")
    dens = c.quantity("density", u.cm ** -3, default=None, lo=1e6, hi=1e13)
    loop = c.quantity("loop_half_length", u.cm, default=1e10 * u.cm, lo=1e7, hi=1e13)
    dsec = c.section("dem", required=True)
    dem = dem_from_section(dsec, em_unit=u.cm ** -3)
    c.finish()
    return _wrap(c, None, Corona, dem=dem, abundances=abund, density=dens, loop_half_length=loop)


def _cme(root: Section):
    from ..dimming.scenario import CME

    c = root.section("cme", required=True)
    kw = dict(
        mass=c.quantity("mass", u.g, required=True, lo=0.0, hi=1e25),
        source_temperature=c.quantity("source_temperature", u.K, default=1.5e6 * u.K, lo=1e5, hi=1e8),
        escape_fraction=c.number("escape_fraction", default=1.0, lo=0.0, hi=1.0),
        speed=c.quantity("speed", u.km / u.s, default=500 * u.km / u.s, lo=0.0, lo_inclusive=False, hi=3e5),
        source_size=c.quantity("source_size", u.cm, default=1e10 * u.cm, lo=0.0, lo_inclusive=False, hi=1e13),
        onset=c.quantity("onset", u.s, default=None, lo=0.0),
        distribution=c.string("distribution", default="window", choices=("window", "gaussian")),
        window=c.number("window", default=0.15, lo=0.0, lo_inclusive=False, hi=2.0),
        width=c.number("width", default=None, lo=0.0, lo_inclusive=False, hi=2.0),
        expansion_factor=c.number("expansion_factor", default=1.0, lo=1.0, hi=1e3),
        expanding_fraction=c.number("expanding_fraction", default=1.0, lo=0.0, hi=1.0),
    )
    if kw["distribution"] == "gaussian" and kw["width"] is None:
        raise c.error("width", "required with distribution = \"gaussian\" (sigma in dex, e.g. width = 0.1)")
    if c.has("recovery") and isinstance(c.data["recovery"], str) and c.data["recovery"] in ("refill", "cooling"):
        recovery = c.string("recovery")
    elif c.has("recovery"):
        if not isinstance(c.data["recovery"], str):
            raise c.error("recovery", "must be \"refill\", \"cooling\" or a time with a unit, e.g. \"3 h\"")
        recovery = c.quantity("recovery", u.s, lo=0.0, lo_inclusive=False)
    else:
        recovery = "refill"
    upflow = c.number("upflow_fraction", default=0.05, lo=0.0, lo_inclusive=False, hi=1.0)
    c.finish()
    return _wrap(c, None, CME, **kw), recovery, upflow


def _flare(root: Section):
    from ..dimming.flare_class import RELATIONS
    from ..dimming.scenario import Flare
    from ..instruments.soft_xray_monitor import class_flux

    f = root.section("flare", required=False)
    if f is None:
        return None, None
    if f.has("energy") and f.has("class"):
        raise f.error("class", "give either energy or class, not both")
    cls = None
    if f.has("class"):
        cls = f.string("class")
        _wrap(f, "class", class_flux, cls)
        given = dict(flare_class=cls)
    else:
        given = dict(energy=f.quantity("energy", u.erg, required=True, lo=0.0, lo_inclusive=False, hi=1e40))
    kw = dict(
        loop_half_length=f.quantity("loop_half_length", u.cm, default=2e9 * u.cm, lo=1e7, hi=1e13),
        loop_cross_section=f.quantity("loop_cross_section", u.cm ** 2, default=1e18 * u.cm ** 2, lo=0.0,
                                      lo_inclusive=False, hi=1e26),
        initial_temperature=f.quantity("initial_temperature", u.K, default=2e6 * u.K, lo=1e5, hi=1e8),
        duration=f.quantity("duration", u.s, default=600 * u.s, lo=0.0, lo_inclusive=False, hi=1e6),
        delay=f.quantity("delay", u.s, default=0 * u.s, lo=0.0, hi=1e6),
        n_strands=f.number("n_strands", default=None, lo=0.0, lo_inclusive=False, hi=1e6, hi_inclusive=False),
        em_t_relation=f.string("em_t_relation", default="solar", choices=RELATIONS),
    )
    f.finish()
    return _wrap(f, None, Flare, **given, **kw), cls


_MIRROR_KEYS = {
    "multilayer": ("period", "gamma", "n_bilayers", "materials", "substrate", "roughness", "angle", "n_reflections"),
    "grazing": ("material", "grazing_angle", "roughness", "n_reflections", "density"),
}


def _mirror(m: Section):
    kind = m.string("kind", required=True, choices=tuple(_MIRROR_KEYS))
    if kind == "multilayer":
        mats = m.strings("materials", default=["Mo", "Si"])
        if len(mats) != 2:
            raise m.error("materials", "must be two materials [absorber, spacer], e.g. [\"Mo\", \"Si\"]")
        d = dict(period=m.quantity("period", u.nm, required=True, lo=0.5, hi=100.0),
                 gamma=m.number("gamma", default=0.25, lo=0.0, lo_inclusive=False, hi=1.0, hi_inclusive=False),
                 n_bilayers=m.number("n_bilayers", default=40, lo=1, hi=1000, integer=True),
                 materials=tuple(mats), substrate=m.string("substrate", default="Si"),
                 roughness=m.quantity("roughness", u.nm, default=0.5 * u.nm, lo=0.0, hi=10.0),
                 angle=m.quantity("angle", u.deg, default=0 * u.deg, lo=0.0, hi=90.0, hi_inclusive=False),
                 n_reflections=m.number("n_reflections", default=2, lo=1, hi=100, integer=True))
    else:
        d = dict(material=m.string("material", default="Au"),
                 grazing_angle=m.quantity("grazing_angle", u.deg, required=True, lo=0.0, lo_inclusive=False, hi=90.0),
                 roughness=m.quantity("roughness", u.nm, default=0.5 * u.nm, lo=0.0, hi=10.0),
                 n_reflections=m.number("n_reflections", default=2, lo=1, hi=100, integer=True),
                 density=m.quantity("density", u.g / u.cm ** 3, default=None, lo=0.0, lo_inclusive=False, hi=30.0))
    m.finish()
    return dict(kind=kind, **d)


def _filter(f: Section):
    mat = f.string("material", required=True)
    thick = f.quantity("thickness", u.nm, required=True, lo=0.0, hi=1e6)
    extra = {}
    dens = f.quantity("density", u.g / u.cm ** 3, default=None, lo=0.0, lo_inclusive=False, hi=30.0)
    if dens is not None:
        extra["density"] = dens
    ox_mat = f.string("oxide_material", default=None)
    ox_t = f.quantity("oxide_thickness", u.nm, default=None, lo=0.0, hi=1e4)
    if (ox_mat is None) != (ox_t is None):
        raise f.error("oxide_thickness" if ox_t is None else "oxide_material",
                      "oxide_material and oxide_thickness go together (e.g. \"Al2O3\" and \"5 nm\")")
    if ox_mat is not None:
        extra["oxide"] = [(ox_mat, ox_t)]
    mesh = f.number("mesh_fraction", default=None, lo=0.0, hi=1.0, hi_inclusive=False)
    if mesh is not None:
        extra["mesh_fraction"] = mesh
    f.finish()
    return (mat, thick, extra) if extra else (mat, thick)


def _detector(d: Section):
    kw = dict(dead_layer=d.quantity("dead_layer", u.um, default=0.1 * u.um, lo=0.0, hi=1e3),
              depletion_depth=d.quantity("depletion_depth", u.um, default=40 * u.um, lo=0.0, lo_inclusive=False,
                                         hi=1e4),
              oxide=d.quantity("oxide", u.nm, default=10 * u.nm, lo=0.0, hi=1e4))
    rn = d.number("read_noise", default=None, lo=0.0, hi=1e4)
    if rn is not None:
        kw["read_noise"] = rn
        kw["channel_width"] = d.quantity("channel_width", u.eV, default=10 * u.eV, lo=0.0, lo_inclusive=False,
                                         hi=1e4)
    d.finish()
    return kw


def _instrument(s: Section):
    """One ``[[instrument]]`` table -> (Instrument, band names, description of the source)."""
    from ..instruments.designs import build_instrument, list_generic, load_generic
    from ..instruments.readers import load_instrument

    kinds = [k for k in ("generic", "arf", "table", "design") if s.has(k)]
    if len(kinds) != 1:
        raise ScenarioError(f"{s.where()}: give exactly one of generic = \"<name>\", arf = \"<file>\", table = "
                            f"\"<file>\" or a [{s.path}.design] table (found: {', '.join(kinds) or 'none'})")
    kind = kinds[0]
    name = s.string("name", default=None)
    if kind == "generic":
        gname = s.string("generic")
        if gname not in list_generic():
            raise s.error("generic", f"not a generic instrument; available: {', '.join(list_generic())}")
        inst = load_generic(gname)
        src = f"generic design {gname}"
    elif kind == "arf":
        arf = s.path_value("arf", required=True)
        rmf = s.path_value("rmf", default=None)
        inst = _wrap(s, "arf", load_instrument, arf, rmf=rmf, name=name)
        src = f"OGIP ARF {arf.name}" + (f" + RMF {rmf.name}" if rmf is not None else "")
    elif kind == "table":
        tab = s.path_value("table", required=True)
        inst = _wrap(s, "table", load_instrument, tab, name=name)
        src = f"effective-area table {tab.name}"
    else:
        d = s.section("design", required=True)
        area = d.quantity("geometric_area", u.cm ** 2, required=True, lo=0.0, lo_inclusive=False, hi=1e7)
        msec = d.section("mirror")
        mirror = _mirror(msec) if msec is not None else None
        filters = [_filter(f) for f in d.sections("filter")]
        dsec = d.section("detector")
        det = _detector(dsec) if dsec is not None else None
        emin = d.quantity("energy_min", u.keV, default=0.02 * u.keV, lo=0.01, hi=100.0)
        emax = d.quantity("energy_max", u.keV, default=10 * u.keV, lo=0.01, hi=100.0)
        step = d.number("relative_step", default=1e-3, lo=1e-5, hi=0.1)
        if emax <= emin:
            raise d.error("energy_max", f"must be above energy_min = {emin:g}")
        desc = d.string("description", default="")
        d.finish()
        from ..instruments.designs import default_design_grid

        grid = default_design_grid(emin, emax, step)
        inst = _wrap(d, None, build_instrument, mirror=mirror, filters=filters, detector=det, geometric_area=area,
                     energy_grid=grid, name=name or "proposed-design",
                     description=desc or f"physics-built design '{name or 'proposed-design'}' from {s.file}")
        src = "physics-built design (mirror, filters, detector)"
    if name is not None and kind == "generic":
        import copy

        inst = copy.copy(inst)
        inst.name = name
    extra = s.section("define_bands")
    if extra is not None:
        new = {k: extra.band(k, required=True) for k in list(extra.data)}
        extra.finish()
        inst = _wrap(s, "define_bands", inst.with_bands, **new)
    bands = s.strings("bands", default=None)
    if bands is None:
        bands = list(inst.bands) or ["total"]
    known = list(inst.bands) + ["total"]
    for b in bands:
        if b not in known:
            raise s.error("bands", f"band '{b}' is not a band of {inst.name}; its bands: {', '.join(known)} "
                                   "(add one with [instrument.define_bands])")
    s.finish()
    return inst, tuple(bands), src


def _observation(root: Section, labels):
    from ..dimming.scenario import Observation

    o = root.section("observation", required=True)
    exposure = o.quantity("exposure", u.s, required=True, lo=0.0, lo_inclusive=False, hi=1e9)
    bw = o.quantity("bin_width", u.s, required=True, lo=0.0, lo_inclusive=False, hi=1e8)
    pre = o.quantity("pre_event", u.s, required=True, lo=0.0, lo_inclusive=False, hi=1e9)
    if o.has("background") and isinstance(o.data["background"], dict):
        b = o.section("background")
        bg = {}
        for k in list(b.data):
            if k not in labels:
                raise b.error(k, f"not a band of this scenario; bands: {', '.join(labels)}")
            bg[k] = b.quantity(k, u.ct / u.s, lo=0.0, hi=1e12)
        b.finish()
    else:
        bg = o.quantity("background", u.ct / u.s, default=0 * u.ct / u.s, lo=0.0, hi=1e12)
    fa = o.number("false_alarm", default=0.01, lo=0.0, lo_inclusive=False, hi=0.5, hi_inclusive=False)
    o.finish()
    return _wrap(o, None, Observation, exposure=exposure, bin_width=bw, pre_event=pre, background=bg, false_alarm=fa,
                 red_noise=_variability(root))


#: Valid ranges of the ``[variability]`` keys: amplitude (rms fraction) and timescale [s].
VARIABILITY_RANGES = {"amplitude": (0.0, 1.0), "timescale": (0.0, 1e9)}


def _variability(root: Section):
    """The optional ``[variability]`` table -> :class:`~synthcorona.dimming.noise.RedNoise` or None.

    ``amplitude``: rms of the relative fluctuation of the source rate (plain number, [0, 1]);
    ``timescale``: damping time tau of the damped random walk (time, (0, 1e9] s); both required in
    the table. The model is that of Kelly, Bechtold & Siemiginowska (2009, ApJ 698, 895).
    """
    from ..dimming.noise import RedNoise

    v = root.section("variability")
    if v is None:
        return None
    (a_lo, a_hi), (t_lo, t_hi) = VARIABILITY_RANGES["amplitude"], VARIABILITY_RANGES["timescale"]
    amplitude = v.number("amplitude", required=True, lo=a_lo, hi=a_hi)
    timescale = v.quantity("timescale", u.s, required=True, lo=t_lo, lo_inclusive=False, hi=t_hi)
    v.finish()
    return _wrap(v, None, RedNoise, float(amplitude), timescale)


def _montecarlo(root: Section, mass, false_alarm: float):
    from ..dimming.sizes import (
        DEFAULT_PRECISION,
        MIN_EXCEEDANCES,
        PRECISION_RANGE,
        minimum_realisations,
        realisations_for_precision,
    )
    from ..products.forecast import REALISATIONS_RANGE

    m = root.section("montecarlo")
    if m is None:
        m = Section({}, "montecarlo", root.file)
    lo, hi = REALISATIONS_RANGE
    statistic = m.string("statistic", default="window", choices=STATISTICS)
    onset = m.string("onset", default="scan", choices=ONSETS)
    if m.has("realisations") and m.has("precision"):
        raise m.error("precision", "give either realisations or precision, not both")
    precision = None
    if m.has("realisations"):
        n = m.number("realisations", lo=lo, hi=hi, integer=True, required=True)
    else:
        precision = m.number("precision", default=DEFAULT_PRECISION, lo=PRECISION_RANGE[0], hi=PRECISION_RANGE[1])
        n = realisations_for_precision(precision, false_alarm,
                                       exact_threshold=statistic == "window" and onset == "known")
        if n > hi:
            raise m.error("precision", f"needs {n} realisations, more than the {hi} a forecast accepts: ask for a "
                                       "larger precision (standard error of P(detect))")
    mc = MonteCarlo(realisations=n, seed=m.number("seed", default=0, lo=0, hi=2 ** 63 - 1, integer=True),
                    statistic=statistic, onset=onset, precision=precision)
    need = minimum_realisations(false_alarm)
    if mc.realisations < need:
        raise m.error("realisations", f"too few to calibrate the detection threshold at [observation] false_alarm = "
                                      f"{false_alarm:g}: give at least {need} ({MIN_EXCEEDANCES} / false_alarm)")
    target = m.number("target_probability", default=0.5, lo=0.0, lo_inclusive=False, hi=1.0, hi_inclusive=False)
    if m.has("mass_grid") and isinstance(m.data["mass_grid"], dict):
        g = m.section("mass_grid")
        lo = g.quantity("min", u.g, required=True, lo=0.0, lo_inclusive=False, hi=1e25)
        hi = g.quantity("max", u.g, required=True, lo=0.0, lo_inclusive=False, hi=1e25)
        n = g.number("points", default=9, lo=2, hi=200, integer=True)
        if hi <= lo:
            raise g.error("max", f"must be above min = {lo:g}")
        g.finish()
        grid = np.geomspace(lo.value, hi.value, n) * u.g
    elif m.has("mass_grid"):
        grid = m.quantity("mass_grid", u.g, array=True, lo=0.0, hi=1e25)
        if np.any(np.diff(grid.value) <= 0):
            raise m.error("mass_grid", "masses must be strictly increasing")
    else:
        mv = float(mass.to_value(u.g))
        grid = np.geomspace(mv / 30, mv * 3, 9) * u.g if mv > 0 else np.geomspace(1e14, 1e18, 9) * u.g
    m.finish()
    return mc, grid, target


def _output(root: Section):
    from ..products.spectrum import DEFAULT_FLUX_BANDS

    o = root.section("output")
    if o is None:
        o = Section({}, "output", root.file)
    out = dict(report=o.string("report", default="md", choices=("md", "html", "both", "none")),
               figures=o.boolean("figures", default=True),
               show_realisations=o.number("show_realisations", default=2, lo=0, hi=50, integer=True),
               spectrum_range=o.band("spectrum_range", default=u.Quantity([1.0, 400.0], u.AA)),
               spectrum_bin=o.quantity("spectrum_bin", u.AA, default=0.05 * u.AA, lo=1e-4, hi=100.0))
    if o.has("flux_bands"):
        raw = o.strings("flux_bands")
        tmp = Section({f"flux_bands[{i}]": v for i, v in enumerate(raw)}, o.path, o.file)
        out["flux_bands"] = [tmp.band(k, required=True) for k in list(tmp.data)]
    else:
        out["flux_bands"] = [b.quantity for b in DEFAULT_FLUX_BANDS]
    o.finish()
    return out


def read_forecast_file(path=None, *, text: str | None = None, name: str | None = None, build: bool = True,
                       table=None) -> ForecastInputs:
    """Read a forecast scenario file (``path``, always a file path, UTF-8 text), or TOML text given as ``text=``,
    into :class:`ForecastInputs` (``name`` names the text in messages).

    Builds the :class:`~synthcorona.dimming.scenario.DimmingScenario` on the emissivity ``table``
    (an EmissivityTable or a path; default: see :func:`synthcorona.emissivity.resolve_table`) with
    :meth:`ForecastInputs.with_scenario`; ``build=False`` leaves ``scenario`` None, for callers that
    check the inputs first or build their own variants with :meth:`ForecastInputs.build_scenario`.
    Every mistake raises :class:`ScenarioError` naming the file and the key. Keys:
    ``docs/scenario_reference.md``.
    """
    is_file = text is None
    if is_file:
        if path is None:
            raise InputError("read_forecast_file: give a file path, or TOML text as text=", argument="path")
        text = read_input_text(path)
    elif path is not None:
        raise InputError("read_forecast_file: give a file path or text=, not both", argument="path")
    root = load_toml(text=text, name=name or (str(path) if is_file else None))
    check_text_values(root)
    sc = root.section("scenario")
    if sc is None:
        sc = Section({}, "scenario", root.file)
    title = sc.string("title", default=pathlib.Path(root.file).stem if is_file else "CME-dimming forecast")
    description = sc.string("description", default="")
    sc.finish()
    star, star_name = read_star(root)
    corona = _corona(root)
    cme, recovery, upflow = _cme(root)
    flare, flare_class = _flare(root)
    entries, spec = [], {}
    for s in root.sections("instrument", required=True):
        inst, bands, src = _instrument(s)
        entries.append(InstrumentEntry(inst, bands, src))
        for b in bands:
            label = inst.name if b == "total" else f"{inst.name}:{b}"
            if label in spec:
                raise ScenarioError(f"{s.where('bands')}: band label '{label}' appears twice; give the instruments "
                                    "different names (name = \"...\")")
            spec[label] = (inst, b)
    observation = _observation(root, list(spec))
    mc, grid, target = _montecarlo(root, cme.mass, observation.false_alarm)
    output = _output(root)
    root.finish()
    inputs = ForecastInputs(scenario=None, star=star, corona=corona, cme=cme, flare=flare, observation=observation,
                            instrument=spec, instruments=tuple(entries), montecarlo=mc, mass_grid=grid,
                            target_probability=float(target), title=title, description=description,
                            source=root.file, raw_text=text, raw=dict(root.data), recovery=recovery,
                            upflow_fraction=upflow, output=output, flare_class=flare_class, star_name=star_name)
    return inputs.with_scenario(table=table) if build else inputs
