"""Activity-cycle files: a TOML description of a star's corona phase by phase -> :class:`CycleInputs`.

:func:`read_cycle_file` reads the top-level keys (``title``, ``period``, ``abundances``,
``density``, ``reference_scenario``) and the tables ``[star]``, ``[report]`` (with
``[report.bands]``), ``[conversion]``, ``[dimming]`` and ``[[phase]]`` (each with a
``[phase.dem]`` table or ``flux`` + ``band`` + ``temperature``), checking every key (type, unit,
range; unknown keys refused) with :class:`synthcorona.io.toml.Section`. A reference CME scenario
is read with :func:`synthcorona.io.forecast_file.read_forecast_file`. Every key, unit and default is
documented in ``docs/cycle_reference.md``; :meth:`CycleInputs.run` calls
:func:`synthcorona.products.cycle.compare_cycle`.
"""
from __future__ import annotations

import pathlib
from dataclasses import dataclass, field
from typing import Any

import astropy.units as u

from ..errors import InputError, ScenarioError
from .toml import Section, abundances_from_key, dem_from_section, load_toml

__all__ = ["CycleInputs", "read_cycle_file", "DEFAULT_REALISATIONS"]

#: Monte Carlo realisations when neither ``[dimming] realisations`` nor the reference file gives them.
DEFAULT_REALISATIONS = 1000


@dataclass
class CycleInputs:
    """Everything a cycle file defines; :meth:`run` computes the comparison."""

    title: str
    star: Any
    star_name: str | None
    phases: list
    bands: dict
    instruments: list
    hardness: list | None
    conversion: Any
    reference: Any
    n_realisations: int
    seed: int
    minimum_mass: bool
    abundances: Any
    density: u.Quantity | None
    period: u.Quantity | None
    source: str
    reference_path: str | None = None
    extra: dict = field(default_factory=dict)

    @property
    def minimum_realisations(self) -> int:
        """The fewest Monte Carlo realisations the reference scenario's false-alarm probability allows
        (:func:`synthcorona.dimming.sizes.minimum_realisations`; 1 without a reference scenario)."""
        from ..dimming.sizes import minimum_realisations

        if self.reference is None:
            return 1
        return minimum_realisations(self.reference.observation.false_alarm)

    def run(self, n_realisations: int | None = None, table=None):
        """:func:`synthcorona.products.cycle.compare_cycle` with these inputs (``n_realisations`` overrides the
        file; ``table``: emissivity table, an EmissivityTable or a path, default see
        :func:`synthcorona.emissivity.resolve_table`)."""
        from ..products.cycle import compare_cycle

        ds = _wrap(self.source, compare_cycle, self.phases, self.star, bands=self.bands,
                   instruments=self.instruments or None, hardness=self.hardness, conversion=self.conversion,
                   reference=self.reference, n_realisations=n_realisations or self.n_realisations, seed=self.seed,
                   minimum_mass=self.minimum_mass, abundances=self.abundances, density=self.density,
                   period=self.period, name=self.star_name or self.title, table=table)
        ds.attrs["cycle_file"] = self.source
        ds.attrs["cycle_title"] = self.title
        if self.reference_path:
            ds.attrs["reference_scenario_file"] = self.reference_path
        return ds


def _wrap(where: str, fn, *args, **kwargs):
    """Call ``fn``; an :class:`InputError` from it becomes a ScenarioError prefixed by ``where``."""
    try:
        return fn(*args, **kwargs)
    except ScenarioError:
        raise
    except InputError as exc:
        raise ScenarioError(f"{where}: {exc}") from None


def _phase_value(p: Section):
    """``phase``: a plain number (cycle fraction in [0, 1)) or a time with a unit ("3 yr")."""
    v = p.raw("phase", required=True)
    if isinstance(v, str):
        return p.quantity("phase", u.yr, lo=-1e4, hi=1e4)
    return p.number("phase", lo=0.0, hi=1.0, hi_inclusive=False)


def _phases(root: Section) -> list:
    from ..products.cycle_phase import CyclePhase, coincident_phases

    secs = root.sections("phase", required=True)
    if len(secs) < 2:
        raise ScenarioError(f"{root.file}: [[phase]]: a cycle needs at least two phases; found {len(secs)}")
    out, kinds, seen = [], set(), {}
    for p in secs:
        label = p.string("label", required=True)
        if label in seen:
            raise p.error("label", f"repeats the label of {seen[label]}; labels must be unique")
        seen[label] = f"[{p.path}]"
        phase = _phase_value(p)
        kinds.add(isinstance(phase, u.Quantity))
        if len(kinds) > 1:
            raise p.error("phase", "mixes cycle fractions (plain numbers in [0, 1)) and times (\"3 yr\"); give "
                                   "every phase the same way")
        dsec = p.section("dem")
        if "width_dex" in p.data:
            raise p.error("width_dex", f"renamed: write width_logT = {p.data['width_dex']!r} (the parameter name of "
                                       "GaussianDEM)")
        flux_keys = [k for k in ("flux", "band", "temperature", "width_logT") if p.has(k)]
        if dsec is not None and flux_keys:
            raise p.error(flux_keys[0], "give either a [phase.dem] table or flux + band + temperature, not both")
        if dsec is not None:
            dem = dem_from_section(dsec, em_unit=u.cm ** -3)
            phase_obj = _wrap(p.where(), CyclePhase, label, phase, dem=dem)
        else:
            if not flux_keys:
                raise ScenarioError(f"{p.where()}: needs a [phase.dem] table, or flux, band and temperature")
            flux = p.quantity("flux", u.erg / u.s / u.cm ** 2, required=True, lo=0.0, lo_inclusive=False)
            band = p.band("band", required=True)
            temp = p.quantity("temperature", u.K, required=True, lo=1e4, hi=1e9)
            width = p.number("width_logT", default=None, lo=0.0, lo_inclusive=False, hi=3.0)
            phase_obj = _wrap(p.where(), CyclePhase, label, phase, flux=flux, band=band, temperature=temp,
                              width_logT=width)
        p.finish()
        out.append(phase_obj)
    same = coincident_phases(out)
    if same is not None:
        (i, a), (j, b) = ((k, out[k]) for k in same)
        raise ScenarioError(f"{root.file}: [[phase]]: phases '{a.label}' ([{secs[i].path}]) and '{b.label}' "
                            f"([{secs[j].path}]) are at the same time (phase = {_phase_text(secs[i])} and "
                            f"{_phase_text(secs[j])}); every phase needs its own time", argument="phase")
    return out


def _phase_text(p: Section) -> str:
    """The ``phase`` key of a [[phase]] table as written in the file."""
    v = p.data.get("phase")
    return f'"{v}"' if isinstance(v, str) else f"{v!r}"


def _abs_spec(spec: str, file: str) -> str:
    """An instrument-band spec with a relative response-file path made relative to the cycle file."""
    from ..instruments.designs import list_generic

    name, sep, band = spec.rpartition(":")
    if not (sep and name and band):
        name, band = spec, None
    if name in list_generic() or pathlib.Path(name).expanduser().is_absolute() or file in ("<string>", "<input>"):
        return spec
    p = pathlib.Path(file).parent / name
    if not p.exists():
        return spec
    return str(p) + (f":{band}" if band is not None else "")


def _report(root: Section):
    from ..instruments.channels import resolve_channels
    from ..products.cycle import DEFAULT_BANDS

    r = root.section("report")
    if r is None:
        return dict(DEFAULT_BANDS), [], None
    bsec = r.section("bands")
    if bsec is None:
        bands = dict(DEFAULT_BANDS)
    else:
        if not bsec.data:
            raise ScenarioError(f"{bsec.where()}: empty; give at least one band, e.g. soft = \"0.1-2.4 keV\"")
        bands = {k: bsec.band(k, required=True) for k in list(bsec.data)}
        bsec.finish()
    instruments = [_abs_spec(x, root.file) for x in r.strings("instruments", default=[])]
    if instruments:
        _wrap(r.where("instruments"), resolve_channels, list(instruments))
    hardness = r.strings("hardness", default=None)
    r.finish()
    return bands, list(instruments), hardness


def _conversion(root: Section):
    from ..instruments.channels import resolve_channels
    from ..instruments.conversion import CountConversion

    c = root.section("conversion")
    if c is None:
        return None
    src = _abs_spec(c.string("from", required=True), root.file)
    tgt = _abs_spec(c.string("to", required=True), root.file)
    for key, spec in (("from", src), ("to", tgt)):
        ch = _wrap(c.where(key), resolve_channels, spec)
        if len(ch) != 1:
            raise c.error(key, f"names {len(ch)} instrument bands ({', '.join(x[0] for x in ch)}); name one, e.g. "
                               f"\"{ch[0][0]}\"")
    rate = c.quantity("rate", u.ct / u.s, default=None, lo=0.0)
    fb = c.band("flux_band", default=None)
    absorbed = c.boolean("absorbed", default=False)
    c.finish()
    return CountConversion(src, tgt, rate=rate, flux_band=fb, absorbed=absorbed)


def _reference(root: Section):
    path = root.path_value("reference_scenario", default=None)
    if path is None:
        return None, None
    try:
        from .forecast_file import read_forecast_file
    except ImportError:  # pragma: no cover - the forecast reader ships with the package
        raise root.error("reference_scenario", "forecast scenario files cannot be read: synthcorona.io.forecast_file "
                                               "is missing from this installation") from None
    return read_forecast_file(path, build=False), str(path)


def read_cycle_file(path=None, *, text: str | None = None, name: str | None = None) -> CycleInputs:
    """Read a cycle file into :class:`CycleInputs`; keys in ``docs/cycle_reference.md``.

    ``path`` is always a file path (UTF-8 text); TOML text is read with ``text=`` (``name`` names it in
    messages; relative paths in it are taken relative to ``name``'s folder). Every mistake raises
    :class:`~synthcorona.errors.ScenarioError` naming the file and the key.
    """
    from ..dimming.sizes import MIN_EXCEEDANCES, minimum_realisations
    from .forecast_file import check_text_values

    root = load_toml(path, text=text, name=name)
    check_text_values(root)
    is_file = path is not None
    title = root.string("title", default=pathlib.Path(root.file).stem if is_file else "activity cycle")
    period = root.quantity("period", u.yr, default=None, lo=0.0, lo_inclusive=False, hi=1e4)
    reference, ref_path = _reference(root)
    if root.has("abundances") or reference is None:
        abundances = abundances_from_key(root, "abundances", default="coronal")
    else:
        abundances = reference.corona.abundances
    density = root.quantity("density", u.cm ** -3, default=None, lo=1e6, hi=1e13)
    from .forecast_file import read_star

    star, star_name = read_star(root)
    phases = _phases(root)
    if period is not None and not isinstance(phases[0].phase, u.Quantity):
        raise root.error("period", "applies to phases given as times (\"3 yr\"); these phases are cycle fractions")
    bands, instruments, hardness = _report(root)
    if hardness is not None:
        from ..instruments.channels import resolve_channels
        from ..products.cycle import hardness_pairs

        labels = [c[0] for c in resolve_channels(instruments)] if instruments else []
        _wrap(f"{root.file}: [report] hardness", hardness_pairs, hardness, labels)
    conversion = _conversion(root)
    d = root.section("dimming")
    mc = getattr(reference, "montecarlo", None)
    n_real, seed, min_mass = (getattr(mc, "realisations", DEFAULT_REALISATIONS), getattr(mc, "seed", 0), False)
    if d is not None:
        if reference is None:
            raise ScenarioError(f"{d.where()}: needs reference_scenario = \"<forecast file>\" at the top of the file")
        n_real = d.number("realisations", default=n_real, integer=True, lo=1, hi=10_000_000)
        seed = d.number("seed", default=seed, integer=True, lo=0, hi=2 ** 63 - 1)
        min_mass = d.boolean("minimum_mass", default=False)
        fa = float(reference.observation.false_alarm)
        need = minimum_realisations(fa)
        if d.has("realisations") and n_real < need:
            raise d.error("realisations", f"too few for the reference scenario's false_alarm={fa:g}: the detection "
                                          f"threshold needs >= {MIN_EXCEEDANCES} expected false alarms; valid range "
                                          f">= {need}")
        d.finish()
    root.finish()
    return CycleInputs(title=title, star=star, star_name=star_name, phases=phases, bands=bands,
                       instruments=instruments, hardness=hardness, conversion=conversion, reference=reference,
                       n_realisations=int(n_real), seed=int(seed), minimum_mass=bool(min_mass), abundances=abundances,
                       density=density, period=period, source=root.file, reference_path=ref_path)
