"""Physics-built instruments: compose mirrors, filters and detectors into an :class:`Instrument`.

:func:`build_instrument` turns a design -- a mirror (grazing-incidence single-layer
coating or normal-incidence periodic multilayer), a list of thin-film filters, a
silicon detector and a geometric collecting area -- into an effective-area curve

    A(E) = A_geom * R_mirror(E)^n_reflections * prod_k T_filter,k(E) * QE(E)

(geometric area times mirror reflectivities times filter transmissions times detector
quantum efficiency: the generic first-order model of a telescope's throughput, common
practice with no single source), computed with :mod:`synthcorona.instruments.multilayer`
and :mod:`synthcorona.instruments.optics`:

* grazing mirrors: Fresnel reflectivity with a Névot-Croce roughness factor
  (Born & Wolf, "Principles of Optics", sect. 1.5; Névot & Croce 1980, Rev. Phys. Appl. 15, 761);
* multilayers: Parratt (1954, Phys. Rev. 95, 359) recursion with Névot-Croce roughness factors;
* filters: Beer-Lambert attenuation;
* silicon detectors: the slab model of Janesick (2001, "Scientific Charge-Coupled
  Devices", SPIE Press, ch. 2);

all with the optical constants of Chantler (2000, J. Phys. Chem. Ref. Data 29, 597)
served by xraydb. A silicon detector given a read noise also gets a Gaussian
redistribution matrix with the Fano-limited energy resolution

    FWHM(E) = 2 sqrt(2 ln 2) w sqrt(F E / w + N_read^2)

(Fano 1947, Phys. Rev. 72, 26; Janesick 2001, ch. 2), with the electron-hole pair energy
w = 3.65 eV and Fano factor F = 0.115 of silicon (both from memory of Janesick 2001).
Peaks are pure Gaussians: no low-energy tail, no escape peaks, no pile-up.

Ready-made generic instruments
------------------------------
:func:`list_generic` / :func:`load_generic` give five instruments built this way so that
the package works with no external files. **They are generic designs of our own, not the
calibration of any real mission or instrument**; use them to explore what a small
telescope of that kind would record, never to analyse real data:

* ``sc-softx`` -- grazing-incidence soft-X-ray telescope (gold, two reflections) with a
  polyimide/Al optical blocking filter and a back-illuminated silicon CCD with Gaussian
  energy resolution; 0.1-10 keV; channel-energy bands soft 0.2-1 keV, hard 1-2.4 keV,
  broad 0.2-2.4 keV, full 0.2-10 keV.
* ``sc-fe9``, ``sc-fe12``, ``sc-fe14`` -- three presets of one parametric narrow-band
  design: a normal-incidence Mo/Si multilayer telescope tuned to a strong iron line (Fe IX
  171.07, Fe XII 193.51 and Fe XIV 211.32 Angstrom: peaks at 171, 193 and 211 Angstrom), each behind two
  aluminium filters, with a back-illuminated CCD counting photons; tabulated 20 eV-10 keV
  (620-1.24 Angstrom: below 20 eV the optical constants are not valid for the films); one
  :class:`Instrument` per channel (their effective-area curves differ), no named bands
  (the whole channel is the band "total").
* ``sc-euvphot`` -- a broadband EUV photometer: a silicon photodiode behind a Zr/C
  filter, responding mainly at 60-300 Angstrom (plus soft X-rays, as such photometers do).
  It counts absorbed photons (a current would be that rate times E / 3.65 eV electrons).
"""
from __future__ import annotations

import dataclasses
import functools
from collections.abc import Mapping
from dataclasses import dataclass, field

import astropy.units as u
import numpy as np
import scipy.sparse as sp
import xraydb
from scipy.special import ndtr

from ..errors import InputError
from ..validation import as_quantity, check_range
from . import multilayer, optics
from .instrument import Instrument

__all__ = [
    "GrazingMirror", "MultilayerMirror", "SiliconDetector", "build_instrument", "default_design_grid",
    "list_generic", "load_generic", "GENERIC_EUV_CHANNELS",
]

#: Names of the three channels of the generic multilayer EUV imager.
GENERIC_EUV_CHANNELS = ("sc-fe9", "sc-fe12", "sc-fe14")
_FWHM_PER_SIGMA = 2.0 * np.sqrt(2.0 * np.log(2.0))
_GENERIC_NOTE = "generic design of synthcorona, not any real mission's or instrument's calibration"


def default_design_grid(lo=0.01 * u.keV, hi=10.0 * u.keV, rel_step: float = 1e-3) -> u.Quantity:
    """Log-uniform photon-energy samples from ``lo`` to ``hi`` with relative step ``rel_step`` (keV).

    Default: 10 eV to 10 keV in 0.1 % steps (6909 samples; 0.17 Angstrom at 171 Angstrom).
    """
    a = float(as_quantity("lo", lo, u.keV, equivalencies=u.spectral()).value)
    b = float(as_quantity("hi", hi, u.keV, equivalencies=u.spectral()).value)
    a, b = min(a, b), max(a, b)
    check_range("rel_step", rel_step, lo=1e-6, hi=0.5)
    n = int(np.ceil(np.log(b / a) / np.log1p(rel_step))) + 1
    return np.geomspace(a, b, n) * u.keV


# ----------------------------------------------------------------------------- component specs
def _int_at_least_1(name: str, value) -> int:
    try:
        ok = not isinstance(value, bool) and int(value) == value
    except (TypeError, ValueError, OverflowError):
        ok = False
    if not ok:
        raise InputError(f"{name}={value!r} must be an integer in [1, 100]")
    check_range(name, int(value), lo=1, hi=100)
    return int(value)


def _check_reflectivity(r: np.ndarray, grid, what: str) -> None:
    """Refuse reflectivities above 1 (optical constants outside their validity), naming the energies."""
    bad = r > 1.0 + 1e-9
    if np.any(bad):
        e = np.atleast_1d(grid.to_value(u.eV, equivalencies=u.spectral()))[np.atleast_1d(bad)]
        raise InputError(
            f"energy_grid: the {what} reflectivity computed from the isolated-atom optical constants exceeds 1 "
            f"(up to {r.max():.3g}) at {e.min():.4g}-{e.max():.4g} eV, where those constants do not describe the "
            f"solid (e.g. Re n < 0 for Mo below ~17 eV); start the grid above {e.max():.4g} eV")


@dataclass(frozen=True)
class GrazingMirror:
    """Single-layer grazing-incidence mirror coating, met ``n_reflections`` times.

    ``R(E)^n`` with ``R`` the Fresnel reflectivity of a thick coating with Névot-Croce
    roughness (:func:`synthcorona.instruments.multilayer.mirror_reflectivity`). A Wolter-type
    telescope (paraboloid + hyperboloid) has two reflections at about the same grazing angle.

    Parameters
    ----------
    material : str
        Coating, e.g. "Au", "Ir", "Pt", "Ni".
    grazing_angle : Quantity
        Angle between ray and surface, (0, 90] deg.
    roughness : Quantity
        rms roughness (>= 0).
    n_reflections : int
        Number of reflections, 1-100.
    density : Quantity, optional
        Coating density; default bulk.
    """
    material: str = "Au"
    grazing_angle: u.Quantity = field(default_factory=lambda: 0.7 * u.deg)
    roughness: u.Quantity = field(default_factory=lambda: 0.5 * u.nm)
    n_reflections: int = 2
    density: u.Quantity | None = None

    def __post_init__(self):
        object.__setattr__(self, "n_reflections", _int_at_least_1("mirror n_reflections", self.n_reflections))
        optics.material_info(self.material, self.density, name="mirror material")
        as_quantity("mirror grazing_angle", self.grazing_angle, u.deg)
        as_quantity("mirror roughness", self.roughness, u.nm)

    def reflectance(self, grid) -> np.ndarray:
        """Mirror factor ``R^n`` (dimensionless ndarray) on a grid of energies or wavelengths."""
        r = multilayer.mirror_reflectivity(grid, self.material, self.grazing_angle, roughness=self.roughness,
                                       density=self.density).value
        _check_reflectivity(r, grid, "grazing mirror")
        return r ** self.n_reflections


@dataclass(frozen=True)
class MultilayerMirror:
    """Periodic two-material multilayer at (near-)normal incidence, met ``n_reflections`` times.

    ``R(E)^n`` with ``R`` from :func:`synthcorona.instruments.multilayer.multilayer_reflectivity`
    (Parratt 1954, Phys. Rev. 95, 359; Névot & Croce 1980, Rev. Phys. Appl. 15, 761).
    A two-mirror (Ritchey-Chrétien-like) normal-incidence telescope has two reflections.

    Parameters
    ----------
    period : Quantity
        Bilayer period d (> 0). The first-order peak is near ``2 d cos(theta)`` corrected
        for refraction.
    gamma : float
        Absorber fraction of a period, (0, 1).
    n_bilayers : int
        Number of periods.
    materials : (str, str)
        (absorber, spacer), default ("Mo", "Si").
    substrate : str
    roughness : Quantity
        rms roughness of every interface.
    angle : Quantity
        Angle of incidence from the normal, [0, 90) deg.
    n_reflections : int
    """
    period: u.Quantity
    gamma: float = 0.25
    n_bilayers: int = 40
    materials: tuple = ("Mo", "Si")
    substrate: str = "Si"
    roughness: u.Quantity = field(default_factory=lambda: 0.5 * u.nm)
    angle: u.Quantity = field(default_factory=lambda: 0.0 * u.deg)
    n_reflections: int = 2

    def __post_init__(self):
        object.__setattr__(self, "n_reflections", _int_at_least_1("mirror n_reflections", self.n_reflections))
        object.__setattr__(self, "materials", tuple(self.materials))
        as_quantity("mirror period", self.period, u.nm)

    def reflectance(self, grid) -> np.ndarray:
        """Mirror factor ``R^n`` (dimensionless ndarray) on a grid of energies or wavelengths."""
        r = multilayer.multilayer_reflectivity(grid, self.period, self.gamma, self.n_bilayers, materials=self.materials,
                                           substrate=self.substrate, roughness=self.roughness,
                                           angle=self.angle).value
        _check_reflectivity(r, grid, "multilayer")
        return r ** self.n_reflections


@dataclass(frozen=True)
class SiliconDetector:
    """Silicon detector (CCD, CMOS or photodiode): quantum efficiency and optional energy resolution.

    QE from :func:`synthcorona.instruments.optics.silicon_qe` (Janesick 2001, ch. 2).
    With ``read_noise`` set, the instrument gets a Gaussian redistribution matrix with
    ``FWHM(E) = 2.3548 w sqrt(F E / w + read_noise^2)`` (Fano 1947, Phys. Rev. 72, 26),
    channels of ``channel_width`` from 0 to the top of the energy grid.

    Parameters
    ----------
    dead_layer, depletion_depth, oxide : Quantity
        As for :func:`~synthcorona.instruments.optics.silicon_qe`.
    read_noise : float, optional
        rms read noise in electrons (>= 0). None: no redistribution (perfect resolution).
    fano : float
        Fano factor of silicon (0.115, from memory of Janesick 2001).
    pair_energy : Quantity
        Mean energy per electron-hole pair (3.65 eV in silicon at room temperature;
        from memory of Janesick 2001).
    channel_width : Quantity
        Width of the detector channels (energy), used with ``read_noise``.
    """
    dead_layer: u.Quantity = field(default_factory=lambda: 0.1 * u.um)
    depletion_depth: u.Quantity = field(default_factory=lambda: 40.0 * u.um)
    oxide: u.Quantity = field(default_factory=lambda: 10.0 * u.nm)
    read_noise: float | None = None
    fano: float = 0.115
    pair_energy: u.Quantity = field(default_factory=lambda: 3.65 * u.eV)
    channel_width: u.Quantity = field(default_factory=lambda: 10.0 * u.eV)

    def __post_init__(self):
        if self.read_noise is not None:
            check_range("detector read_noise", float(self.read_noise), lo=0.0, hi=1e4, unit_label="electrons")
        check_range("detector fano", float(self.fano), lo=0.0, hi=1.0)
        w = as_quantity("detector pair_energy", self.pair_energy, u.eV)
        check_range("detector pair_energy", float(w.value), lo=0.0, hi=None, unit_label="eV", inclusive=False)
        cw = as_quantity("detector channel_width", self.channel_width, u.eV)
        check_range("detector channel_width", float(cw.value), lo=0.0, hi=None, unit_label="eV", inclusive=False)

    def qe(self, grid) -> np.ndarray:
        """Quantum efficiency (dimensionless ndarray) on a grid of energies or wavelengths."""
        return optics.silicon_qe(grid, self.dead_layer, self.depletion_depth, oxide=self.oxide).value

    def fwhm(self, energy) -> u.Quantity:
        """Energy resolution FWHM (keV) at photon energies ``energy`` (Fano-limited Gaussian, see class doc)."""
        e_ev = np.asarray(as_quantity("energy", energy, u.eV, equivalencies=u.spectral()).value, dtype=float)
        w = float(self.pair_energy.to_value(u.eV))
        noise = 0.0 if self.read_noise is None else float(self.read_noise)
        return (_FWHM_PER_SIGMA * w * np.sqrt(self.fano * e_ev / w + noise**2) * 1e-3) * u.keV


def _spec_from_mapping(kind_name: str, classes: dict, value: Mapping, infer):
    """Build a component spec dataclass from a dict, with named errors for unknown keys."""
    d = dict(value)
    kind = d.pop("kind", None) or infer(d)
    if kind not in classes:
        raise InputError(f"{kind_name} kind={kind!r} is not known; valid kinds: {sorted(classes)}")
    cls = classes[kind]
    names = [f.name for f in dataclasses.fields(cls)]
    unknown = sorted(set(d) - set(names))
    if unknown:
        raise InputError(f"{kind_name} ({kind}) has unknown key(s) {unknown}; valid keys: {names}")
    try:
        return cls(**d)
    except TypeError as exc:
        raise InputError(f"{kind_name} ({kind}): {exc}") from None


def _mirror_spec(mirror):
    if mirror is None or isinstance(mirror, (GrazingMirror, MultilayerMirror)):
        return mirror
    if isinstance(mirror, Mapping):
        def infer(d):
            if "period" in d:
                return "multilayer"
            if "grazing_angle" in d or "material" in d:
                return "grazing"
            raise InputError(f"mirror={dict(d)!r}: give kind='grazing' or kind='multilayer' (or a 'period' for a "
                             "multilayer, a 'grazing_angle' for a grazing mirror)")
        return _spec_from_mapping("mirror", {"grazing": GrazingMirror, "multilayer": MultilayerMirror}, mirror, infer)
    raise InputError(f"mirror={mirror!r} must be None, a dict, GrazingMirror or MultilayerMirror")


def _detector_spec(detector):
    if detector is None or isinstance(detector, SiliconDetector):
        return detector
    if isinstance(detector, Mapping):
        return _spec_from_mapping("detector", {"silicon": SiliconDetector}, detector, lambda d: "silicon")
    raise InputError(f"detector={detector!r} must be None, a dict of SiliconDetector fields or a SiliconDetector")


def _gaussian_redistribution(e_lo: np.ndarray, e_hi: np.ndarray, fwhm_kev: np.ndarray, ch_edges: np.ndarray):
    """Sparse (n_channels, n_energy) matrix of Gaussian channel probabilities (bin-integrated, vectorised)."""
    centre = 0.5 * (e_lo + e_hi)
    sigma = fwhm_kev / _FWHM_PER_SIGMA
    z = (ch_edges[:, None] - centre[None, :]) / sigma[None, :]      # (n_ch + 1, n_e)
    cdf = ndtr(z)
    R = np.diff(cdf, axis=0)
    R[R < 1e-12] = 0.0
    return sp.csr_matrix(R)


def _describe_filters(filters) -> list:
    out = []
    for f in filters:
        mat, thick = f[0], f[1]
        extra = f" {dict(f[2])}" if len(f) == 3 else ""
        out.append(f"{mat} {thick}{extra}")
    return out


def build_instrument(mirror=None, filters=(), detector=None, geometric_area=1.0 * u.cm**2, energy_grid=None,
                     bands=None, name: str = "custom-design", description: str = "") -> Instrument:
    """Effective area (and optionally resolution) of a telescope design, as an :class:`Instrument`.

    Parameters
    ----------
    mirror : GrazingMirror, MultilayerMirror, dict or None
        A dict is turned into one of the two specs: ``{"kind": "grazing", "material": "Au",
        "grazing_angle": 0.7 * u.deg, ...}`` or ``{"kind": "multilayer", "period": 8.8 * u.nm,
        "gamma": 0.25, "n_bilayers": 40, ...}`` ("kind" may be left out when ``period`` or
        ``grazing_angle`` says which). None: no mirror (factor 1, e.g. a bare photodiode).
    filters : list of tuple
        ``[(material, thickness), ...]`` or ``(material, thickness, {"oxide": ..., "mesh_fraction": ...,
        "density": ...})``, see :func:`~synthcorona.instruments.optics.filter_transmission`.
    detector : SiliconDetector, dict or None
        Silicon detector spec (dict of its fields allowed). With ``read_noise`` the instrument
        gets a Gaussian redistribution matrix and its bands select channel energies. None: QE 1.
    geometric_area : Quantity
        Unobstructed collecting area (> 0). Default 1 cm^2, so that the effective area is the
        throughput per cm^2 of aperture.
    energy_grid : Quantity, optional
        Sample points (energies or wavelengths, monotonic) at which the components are
        evaluated; default :func:`default_design_grid` (10 eV-10 keV, 0.1 % steps). The
        instrument responds only inside this grid.
    bands : dict, optional
        Named bands (photon energies; channel energies with a redistribution matrix).
    name, description : str

    Returns
    -------
    Instrument
        Without redistribution: :meth:`Instrument.from_samples` of ``A(E)`` on the grid (linear
        between samples). With it: energy bins between consecutive samples with the average of
        the two end values (linear in energy), and a Gaussian matrix (module docstring).
        ``provenance["design"]`` records every component.
    """
    m = _mirror_spec(mirror)
    det = _detector_spec(detector)
    grid = default_design_grid() if energy_grid is None else energy_grid
    if not isinstance(grid, u.Quantity) or grid.unit.physical_type not in ("length", "energy", "frequency"):
        raise u.UnitsError(f"energy_grid must be a Quantity of photon energies or wavelengths; got {grid!r:.60}")
    if grid.ndim != 1 or grid.size < 2:
        raise InputError(f"energy_grid must be 1-D with at least two samples; got shape {grid.shape}")
    filters = list(filters) if filters is not None else []
    area = optics.design_throughput(grid, geometric_area, mirror=None if m is None else m.reflectance(grid),
                                    filters=filters, detector=None if det is None else det.qe(grid))
    e_kev = grid.to_value(u.keV, equivalencies=u.spectral())
    prov = {
        "design": {
            "mirror": repr(m), "filters": _describe_filters(filters), "detector": repr(det),
            "geometric_area": str(as_quantity("geometric_area", geometric_area, u.cm**2)),
            "energy_grid": f"{grid.size} samples, {e_kev.min():.6g}-{e_kev.max():.6g} keV",
        },
        "method": ("A = A_geom R^n prod(T_filter) QE (synthcorona.instruments.designs); optical constants of "
                   "Chantler 2000 (JPCRD 29, 597) via xraydb"),
        "xraydb_version": getattr(xraydb, "__version__", "unknown"),
    }
    desc = description or f"physics-built design '{name}'"
    if det is None or det.read_noise is None:
        return Instrument.from_samples(name, grid, area, bands=bands, description=desc, provenance=prov)
    order = np.argsort(e_kev)
    x, a = e_kev[order], area.to_value(u.cm**2)[order]
    keep = np.diff(x) > 0
    lo, hi = x[:-1][keep], x[1:][keep]
    abin = 0.5 * (a[:-1] + a[1:])[keep]
    cw = float(det.channel_width.to_value(u.keV))
    n_ch = int(np.ceil(hi[-1] / cw - 1e-9))
    ch = np.arange(n_ch + 1) * cw
    R = _gaussian_redistribution(lo, hi, det.fwhm(0.5 * (lo + hi) * u.keV).value, ch)
    prov["design"]["redistribution"] = (f"Gaussian, FWHM = 2.3548 w sqrt(F E / w + N^2) with w = {det.pair_energy}, "
                                        f"F = {det.fano}, N = {det.read_noise} e-; {n_ch} channels of {det.channel_width}")
    return Instrument(name, lo * u.keV, hi * u.keV, abin * u.cm**2, redistribution=R, channel_lo=ch[:-1] * u.keV,
                      channel_hi=ch[1:] * u.keV, bands=bands, description=desc, provenance=prov)


# ----------------------------------------------------------------------------- generic instruments
#: Multilayer periods (nm) putting the first-order normal-incidence peak of a 40-bilayer
#: Mo/Si stack (gamma 0.25, 0.5 nm roughness) at 171, 193 and 211 Angstrom with the Chantler
#: constants (found by iterating period * target / peak on a 0.05 Angstrom grid).
_EUV_PERIODS_NM = {171: 8.775, 193: 9.998, 211: 11.020}
#: Lower end of the EUV designs (620 Angstrom). Below ~20 eV the isolated-atom optical
#: constants do not describe metal films (Mo has Re n < 0 below ~17 eV, making the
#: computed multilayer reflectivity exceed 1; the Al plasma edge near 15 eV, which
#: makes real Al filters opaque longward of ~830 Angstrom, is absent), so the generic EUV
#: designs are not evaluated there: they have no response longward of 620 Angstrom.
_EUV_GRID_MIN = 20.0 * u.eV


def _softx() -> Instrument:
    return build_instrument(
        mirror=GrazingMirror("Au", grazing_angle=0.7 * u.deg, roughness=0.5 * u.nm, n_reflections=2),
        filters=[("C22H10N2O5", 200 * u.nm, {"density": 1.42 * u.g / u.cm**3}),   # polyimide
                 ("Al", 80 * u.nm, {"oxide": [("Al2O3", 4 * u.nm)]})],
        detector=SiliconDetector(dead_layer=0.1 * u.um, depletion_depth=40 * u.um, oxide=10 * u.nm, read_noise=4.0),
        geometric_area=120 * u.cm**2,
        energy_grid=default_design_grid(0.1 * u.keV, 10 * u.keV, 2e-3),
        bands={"soft": [0.2, 1.0] * u.keV, "hard": [1.0, 2.4] * u.keV, "broad": [0.2, 2.4] * u.keV,
               "full": [0.2, 10.0] * u.keV},
        name="sc-softx",
        description=("Generic grazing-incidence soft-X-ray telescope with a silicon CCD (" + _GENERIC_NOTE + "): "
                     "gold coating, 2 reflections at 0.7 deg, 120 cm2 geometric area, 200 nm polyimide + 80 nm Al "
                     "blocking filter, back-illuminated CCD (0.1 um dead layer, 40 um depletion, 4 e- read noise)."),
    )


#: Preset names of the narrow-band EUV design by peak wavelength (Angstrom): named by the dominant iron ion.
_EUV_PRESET_NAMES = {171: "sc-fe9", 193: "sc-fe12", 211: "sc-fe14"}


def _euv(channel: int) -> Instrument:
    al = {"oxide": [("Al2O3", 6 * u.nm)], "mesh_fraction": 0.15}
    return build_instrument(
        mirror=MultilayerMirror(period=_EUV_PERIODS_NM[channel] * u.nm, gamma=0.25, n_bilayers=40,
                                roughness=0.5 * u.nm, n_reflections=2),
        filters=[("Al", 150 * u.nm, al), ("Al", 150 * u.nm, al)],
        detector=SiliconDetector(dead_layer=0 * u.nm, depletion_depth=15 * u.um, oxide=5 * u.nm),
        geometric_area=80 * u.cm**2,
        energy_grid=default_design_grid(_EUV_GRID_MIN, 10 * u.keV, 1e-3),
        name=_EUV_PRESET_NAMES[channel],
        description=(f"Generic narrow-band normal-incidence EUV design peaking at {channel} Angstrom (" + _GENERIC_NOTE + "): two "
                     f"Mo/Si multilayer reflections (period {_EUV_PERIODS_NM[channel]} nm, gamma 0.25, 40 bilayers, "
                     "0.5 nm roughness), two 150 nm Al filters (6 nm oxide, 15 % mesh), back-illuminated CCD "
                     "counting photons, 80 cm2 geometric area."),
    )


def _euvphot() -> Instrument:
    return build_instrument(
        mirror=None,
        filters=[("Zr", 150 * u.nm), ("C", 40 * u.nm, {"density": 2.0 * u.g / u.cm**3})],
        detector=SiliconDetector(dead_layer=0 * u.nm, depletion_depth=30 * u.um, oxide=6 * u.nm),
        geometric_area=1.0 * u.cm**2,
        name="sc-euvphot",
        description=("Generic broadband EUV photometer (" + _GENERIC_NOTE + "): silicon photodiode of 1 cm2 behind a "
                     "150 nm Zr + 40 nm C filter; responds mainly at 60-300 Angstrom and to soft X-rays; counts "
                     "absorbed photons."),
    )


_GENERIC = {
    "sc-softx": (_softx, "grazing-incidence soft-X-ray telescope with a silicon CCD, 0.1-10 keV, bands soft/hard/broad/full"),
    "sc-fe9": (functools.partial(_euv, 171), "narrow-band Mo/Si multilayer EUV design tuned to Fe IX, peak 171 Angstrom"),
    "sc-fe12": (functools.partial(_euv, 193), "narrow-band Mo/Si multilayer EUV design tuned to Fe XII, peak 193 Angstrom"),
    "sc-fe14": (functools.partial(_euv, 211), "narrow-band Mo/Si multilayer EUV design tuned to Fe XIV, peak 211 Angstrom"),
    "sc-euvphot": (_euvphot, "broadband EUV photometer, Zr/C-filtered silicon photodiode, mainly 60-300 Angstrom"),
}


def list_generic() -> dict[str, str]:
    """Names of the ready-made generic instruments with a one-line description each.

    All are generic designs of synthcorona, not any real mission's calibration.
    """
    return {k: f"{v[1]} ({_GENERIC_NOTE})" for k, v in _GENERIC.items()}


@functools.lru_cache(maxsize=None)
def _built(name: str) -> Instrument:
    return _GENERIC[name][0]()


def load_generic(name: str) -> Instrument:
    """A ready-made generic instrument by name (built once, then cached; instances are immutable).

    Raises :class:`InputError` listing the available names if ``name`` is unknown.
    """
    if not isinstance(name, str) or name not in _GENERIC:
        raise InputError(f"name={name!r} is not a generic instrument; available: {', '.join(_GENERIC)}")
    return _built(name)
