"""Synthesis: spectra on any grid, band fluxes and luminosities, and the radiative loss function.

All results are sums over the table temperature grid of ``EM_i * kernel(T_i)``,
where ``EM_i`` are the log-T quadrature weights of a DEM
(:meth:`synthcorona.dem.DEM.em_weights`) and the kernel is the
abundance-weighted emissivity of the table at the requested density or pressure:

* lines: ``A_el * eps_line(T, n_e)`` [erg cm3 s-1];
* continuum: ``sum_el A_el * (ff + fb + 2p)(T, E, n_e)`` [erg cm3 s-1 keV-1], a
  piecewise-linear function of energy between table nodes, integrated exactly over
  each output bin, so flux is conserved for any bin width.

A volume DEM (cm^-3) gives luminosities (erg s-1 into 4π); with ``distance`` the flux
at Earth ``L / (4π d^2)``. A column DEM (cm^-5) gives the intensity
``EM * eps / (4π sr)`` [erg cm-2 s-1 sr-1].

Band fluxes and luminosities take a batch of DEMs; ``distance`` broadcasts against the batch
(numpy rules), and the batch is worked through in chunks that fit the memory budget
(:mod:`synthcorona.batch`, :mod:`synthcorona.memory`). A spectrum is for one DEM at one distance;
its grid is checked against the memory budget before anything is allocated.

Line profiles (optional) are Gaussians integrated over each bin: thermal Doppler
width ``sigma_lambda = lambda / c * sqrt(k T_line / m_ion)`` (Rybicki & Lightman 1979,
eq. 10.73 — the thermal Doppler profile) at the emission-measure-weighted formation
temperature of each line for the given DEM, combined in quadrature with a Gaussian
instrumental FWHM (FWHM = 2 sqrt(2 ln 2) sigma).
"""
from __future__ import annotations

import astropy.units as u
import numpy as np
import xarray as xr
from scipy.special import erf

from .abundances import resolve_abundances
from .batch import broadcast_batch, fold
from .constants import AMU_G, C_CGS, HC_KEV_ANGSTROM, K_B_CGS, K_B_KEV, KEV_TO_ERG
from .emissivity import EmissivityTable, load_emissivity
from .errors import InputError
from .memory import check_allocation
from .spectral import Band, SpectralGrid
from .validation import as_quantity, check_finite

__all__ = ["synthesize", "band_flux", "luminosity", "radiative_loss", "band_kernel", "emissivity_matrix",
           "prepare", "PreparedTable", "dem_weights", "check_dem", "band_list", "line_sigma", "spectrum_nbytes",
           "SPECTRUM_BYTES_PER_BIN"]

_FOUR_PI = 4.0 * np.pi
_FWHM_TO_SIGMA = 1.0 / (2.0 * np.sqrt(2.0 * np.log(2.0)))
#: Work memory of :func:`synthesize` per output bin, bytes (tracemalloc peaks on the embedded table: 120 per bin,
#: 190 with thermal broadening or in photon units; the xarray result holds 16 of them).
SPECTRUM_BYTES_PER_BIN = 200


def spectrum_nbytes(n_bins: float, prep: "PreparedTable | None" = None) -> float:
    """Estimated peak memory (bytes) of :func:`synthesize` on a grid of ``n_bins`` bins: the per-bin arrays, and
    with ``prep`` up to three (lines, temperatures) arrays of the table's line values."""
    lines = 0 if prep is None else 3 * 8 * prep.line_power.size
    return SPECTRUM_BYTES_PER_BIN * float(n_bins) + lines


class PreparedTable:
    """Abundance- and density-resolved kernels of one table, reused by every call with the same inputs.

    Built by :func:`prepare` (which caches it). Attributes: ``table`` (the :class:`EmissivityTable`),
    ``abund`` (resolved abundances), ``log_n`` (log10 n_e per temperature node), ``line_power``
    (L, T) erg cm3 s-1 per line, ``line_energy_kev``, ``cont`` (T, E) continuum erg cm3 s-1 keV-1 and
    its cumulative integrals ``cont_cum`` / ``cont_ph_cum`` (energy / photons), ``valid_T`` and
    ``key``: a hashable identity (table content hash, abundances, density or pressure) for caches.
    """

    def __init__(self, table: EmissivityTable, abundances, density=None, pressure=None, key=None):
        self.table = table
        self.key = key
        self.abund = resolve_abundances(abundances, elements=table.elements)
        self.log_n, self.density_label = table.density_profile(density, pressure)
        a_el = self.abund.as_array(table.elements)
        self.a_el = a_el
        eps = table.line_emissivity(self.log_n)  # (L, T)
        self.line_power = eps * a_el[table.line_element_index][:, None]  # erg cm3 s-1
        self.line_energy_kev = HC_KEV_ANGSTROM / table.line_wavelength
        cont = table.continuum(self.log_n)  # (el, T, E)
        self.cont = np.einsum("e,etk->tk", a_el, cont)  # (T, E) erg cm3 s-1 keV-1
        self.valid_T = np.isfinite(self.log_n)
        self.line_power = np.where(self.valid_T[None, :], self.line_power, 0.0)
        self.cont = np.where(self.valid_T[:, None], self.cont, 0.0)
        e = table.energy
        de = np.diff(e)
        # cumulative integral of the piecewise-linear continuum at the nodes (T, E)
        seg = 0.5 * (self.cont[:, 1:] + self.cont[:, :-1]) * de
        self.cont_cum = np.concatenate([np.zeros((self.cont.shape[0], 1)), np.cumsum(seg, axis=1)], axis=1)
        # same for photons: cont / E (photons cm3 s-1 keV-1 per erg→ photon: divide by E in erg)
        cph = self.cont / (e * KEV_TO_ERG)
        self.cont_ph = cph
        seg = 0.5 * (cph[:, 1:] + cph[:, :-1]) * de
        self.cont_ph_cum = np.concatenate([np.zeros((cph.shape[0], 1)), np.cumsum(seg, axis=1)], axis=1)

    def attrs(self) -> dict:
        out = self.table.provenance_attrs()
        out.update(self.abund.to_attrs())
        out["density_model"] = self.density_label
        return out

    def check_dem_weights(self, w: np.ndarray) -> None:
        """Raise if the DEM puts emission measure where the density model leaves the table."""
        if not np.all(self.valid_T):
            bad = np.any(np.asarray(w) != 0, axis=tuple(range(np.ndim(w) - 1))) & ~self.valid_T
            if np.any(bad):
                t = self.table.logT[bad]
                raise InputError(f"pressure: at log T = {t.min():.2f}-{t.max():.2f} the density p/T lies outside the "
                                 f"table range [{10**self.table.log_density[0]:.3g}, "
                                 f"{10**self.table.log_density[-1]:.3g}] cm^-3, and the DEM has emission measure there")

    # ---------------------------------------------------------------- integrals over energy
    def cont_integral(self, e_lo: np.ndarray, e_hi: np.ndarray, photons: bool) -> np.ndarray:
        """∫ continuum dE over [e_lo, e_hi] (keV) for each bin, shape (T, n_bins); exact for the piecewise-linear model."""
        e = self.table.energy
        lo_bad = np.min(e_lo) < e[0] * (1 - 1e-9)
        hi_bad = np.max(e_hi) > e[-1] * (1 + 1e-9)
        if lo_bad or hi_bad:
            raise InputError(
                f"spectral range {np.min(e_lo):.4g}-{np.max(e_hi):.4g} keV "
                f"({HC_KEV_ANGSTROM/np.max(e_hi):.4g}-{HC_KEV_ANGSTROM/np.min(e_lo):.4g} Angstrom) is outside the "
                f"table's continuum grid {e[0]:.4g}-{e[-1]:.4g} keV ({HC_KEV_ANGSTROM/e[-1]:.4g}-"
                f"{HC_KEV_ANGSTROM/e[0]:.4g} Angstrom)")
        c = self.cont_ph if photons else self.cont
        cum = self.cont_ph_cum if photons else self.cont_cum
        return self._cum_at(np.clip(e_hi, e[0], e[-1]), c, cum) - self._cum_at(np.clip(e_lo, e[0], e[-1]), c, cum)

    def cont_integral_weighted(self, e_lo: np.ndarray, e_hi: np.ndarray, w: np.ndarray, photons: bool) -> np.ndarray:
        """Σ_T w_T ∫ continuum dE over each bin for one weight vector ``w`` (n_T,), shape (n_bins,).

        Same result as ``w @ cont_integral(...)`` but collapses temperature first (fast for fine grids).
        """
        self.cont_integral(np.array([np.min(e_lo)]), np.array([np.max(e_hi)]), photons)  # range check only
        c = self.cont_ph if photons else self.cont
        cum = self.cont_ph_cum if photons else self.cont_cum
        cw = (w @ c)[None, :]
        cumw = (w @ cum)[None, :]
        e = self.table.energy
        return (self._cum_at(np.clip(e_hi, e[0], e[-1]), cw, cumw)
                - self._cum_at(np.clip(e_lo, e[0], e[-1]), cw, cumw))[0]

    def _cum_at(self, x: np.ndarray, c: np.ndarray, cum: np.ndarray) -> np.ndarray:
        e = self.table.energy
        k = np.clip(np.searchsorted(e, x, side="right") - 1, 0, e.size - 2)
        h = e[k + 1] - e[k]
        t = x - e[k]
        ck, ck1 = c[:, k], c[:, k + 1]
        return cum[:, k] + ck * t + 0.5 * (ck1 - ck) * t * t / h

    def line_cumulative(self, photons: bool) -> np.ndarray:
        """Cumulative sums of line values in ascending photon energy, (L+1, T); computed once per kernel set."""
        key = "cum_ph" if photons else "cum_e"
        if key not in self.__dict__:
            lines = self.line_values(photons)
            self.__dict__[key] = np.concatenate([np.zeros((1, lines.shape[1])), np.cumsum(lines[::-1], axis=0)])
        return self.__dict__[key]

    def line_values(self, photons: bool) -> np.ndarray:
        """Per-line power (erg cm3 s-1) or photon rate (photons cm3 s-1), shape (L, T)."""
        if photons:
            return self.line_power / (self.line_energy_kev * KEV_TO_ERG)[:, None]
        return self.line_power


_PREP_CACHE: dict = {}


def prepare(table=None, abundances="coronal", density=None, pressure=None) -> PreparedTable:
    """Abundance- and density-resolved kernels (cached per table, abundances, density/pressure)."""
    table = table if table is not None else load_emissivity()
    if not isinstance(table, EmissivityTable):
        raise InputError(f"table={table!r} is not an EmissivityTable; use synthcorona.load_emissivity(path)")
    abund = resolve_abundances(abundances, elements=table.elements)
    dkey = None if density is None else (float(as_quantity("density", density, u.cm ** -3).value),)
    pkey = None if pressure is None else (float(as_quantity("pressure", pressure, u.K * u.cm ** -3).value),)
    key = (table.content_hash, tuple(sorted(abund.values.items())), dkey, pkey)
    hit = _PREP_CACHE.get(key)
    if hit is None:
        if len(_PREP_CACHE) > 16:
            _PREP_CACHE.clear()
        hit = PreparedTable(table, abund, density=density, pressure=pressure, key=key)
        _PREP_CACHE[key] = hit
    return hit


def check_dem(dem) -> u.UnitBase:
    """The EM unit (cm-3 or cm-5) of ``dem``; :class:`InputError` if it is not a DEM model."""
    from .dem import DEM

    if not isinstance(dem, DEM):
        raise InputError(f"dem={dem!r} is not a DEM model (e.g. synthcorona.GaussianDEM)", argument="dem")
    return dem.em_unit


def dem_weights(dem, prep: PreparedTable) -> tuple[np.ndarray, u.UnitBase]:
    """EM per node of the prepared table's log T grid (plain floats) and its unit (cm-3 or cm-5).

    Refuses a DEM with emission measure where the table has no emissivity (see
    :meth:`PreparedTable.check_dem_weights`). For a large batch use :func:`synthcorona.batch.fold`,
    which works in chunks.
    """
    check_dem(dem)
    w = dem.em_weights(prep.table.logT)
    unit = w.unit
    w = np.asarray(w.value, dtype=float)
    prep.check_dem_weights(w)
    return w, unit


def _output_scale(em_unit, distance):
    """Factor (an array of the distance's shape) and unit turning EM * emissivity into the output quantity."""
    if em_unit.is_equivalent(u.cm ** -5):
        if distance is not None:
            raise InputError("distance is meaningless for a column DEM (cm^-5): the result is an intensity per sr",
                             argument="distance")
        return np.asarray(1.0 / _FOUR_PI), u.sr ** -1, "intensity"
    if distance is None:
        return np.asarray(1.0), u.dimensionless_unscaled, "luminosity"
    d = as_quantity("distance", distance, u.cm)
    check_finite("distance", d)
    if np.any(d.value <= 0):
        raise InputError(f"distance={distance} must be > 0", argument="distance")
    return 1.0 / (_FOUR_PI * np.asarray(d.value, dtype=float) ** 2), u.cm ** -2, "flux"


def band_kernel(bands_kev: np.ndarray, prep: PreparedTable, photons: bool = False) -> np.ndarray:
    """Band emissivity kernels K_b(T) = Σ_lines in band + ∫_band continuum dE.

    Parameters
    ----------
    bands_kev : ndarray (n_b, 2)
        Band limits in keV (lower, upper).
    Returns
    -------
    ndarray (n_b, n_T) in erg cm3 s-1 (or photons cm3 s-1 with ``photons``) per unit EM.
    """
    bands_kev = np.atleast_2d(bands_kev)
    ecum = prep.line_cumulative(photons)  # (L+1, T), lines in ascending energy
    e_line = prep.line_energy_kev[::-1]
    i0 = np.searchsorted(e_line, bands_kev[:, 0], side="left")
    i1 = np.searchsorted(e_line, bands_kev[:, 1], side="left")
    k_lines = ecum[i1] - ecum[i0]
    k_cont = prep.cont_integral(bands_kev[:, 0], bands_kev[:, 1], photons).T
    return k_lines + k_cont


def emissivity_matrix(energy_edges_kev: np.ndarray, prep: PreparedTable, photons: bool = True) -> np.ndarray:
    """Emissivity per unit EM in each bin of an energy grid, shape (n_T, n_bins).

    ``energy_edges_kev`` are n+1 ascending bin edges (keV). Lines fall in the bin holding
    their energy (no broadening); the continuum is integrated exactly over each bin.
    Units: photons cm3 s-1 per bin (``photons=True``) or erg cm3 s-1 per bin.
    """
    edges = np.asarray(energy_edges_kev, dtype=float)
    if edges.ndim != 1 or edges.size < 2 or not np.all(np.diff(edges) > 0):
        raise InputError("energy_edges must be strictly increasing with at least two values")
    cont = prep.cont_integral(edges[:-1], edges[1:], photons)  # (T, n)
    lines = prep.line_values(photons)
    idx = np.searchsorted(edges, prep.line_energy_kev, side="right") - 1
    inside = (idx >= 0) & (idx < edges.size - 1)
    out = cont.copy()
    # scatter lines into bins: for each T a bincount; vectorised via np.add.at on the transposed array
    np.add.at(out.T, idx[inside], lines[inside])
    return out


def band_list(band) -> tuple[np.ndarray, list]:
    """One band (a :class:`~synthcorona.spectral.Band`, a text or a (2,) Quantity), a (n, 2) Quantity, a
    list of bands, or a dict of label -> band, as an (n_b, 2) array of keV limits and the labels."""
    if isinstance(band, dict):
        bands = [Band.coerce(v, f"band[{k!r}]", label=str(k)) for k, v in band.items()]
    elif isinstance(band, (Band, str)) or (isinstance(band, u.Quantity) and band.ndim == 1):
        bands = [Band.coerce(band, "band")]
    elif isinstance(band, u.Quantity) and band.ndim == 2:
        bands = [Band.coerce(b, f"band[{i}]") for i, b in enumerate(band)]
    elif isinstance(band, (list, tuple)) and band and all(isinstance(b, (Band, str)) for b in band):
        bands = [Band.coerce(b, f"band[{i}]") for i, b in enumerate(band)]
    else:
        raise InputError(f"band={band!r}: give two wavelengths or energies as a Quantity, e.g. (0.1, 2.4) * u.keV, "
                         "or a Band", argument="band")
    return np.array([b.energy_kev for b in bands]), [b.label for b in bands]


def _band_quantity(dem, band, distance, table, abundances, density, pressure, photons):
    prep = prepare(table, abundances, density, pressure)
    em_unit = check_dem(dem)
    bands, labels = band_list(band)
    k = band_kernel(bands, prep, photons=photons)  # (n_b, T)
    scale, extra_unit, kind = _output_scale(em_unit, distance)
    shape = broadcast_batch(dem.batch_shape, distance=scale.shape)
    vals = fold(dem, prep, k, shape=shape, name=f"band {kind}",
                what_to_change="dem (a smaller batch)" + (" or distance" if distance is not None else ""))
    vals = vals * scale[..., None]  # shape + (n_b,)
    base = (u.ph if photons else u.erg) / u.s
    unit = base * em_unit * u.cm ** 3 * extra_unit
    q = u.Quantity(vals, unit)
    if kind == "intensity":
        q = q.to(base / u.cm ** 2 / u.sr)
    if isinstance(band, (Band, str)) or (isinstance(band, u.Quantity) and band.ndim == 1):
        q = q[..., 0]
    return q


def band_flux(dem, band, distance, table=None, abundances="coronal", density=None, pressure=None,
              photons: bool = False) -> u.Quantity:
    """Energy (or photon) flux at the observer in a band, for one DEM or a batch of DEMs.

    Parameters
    ----------
    dem : synthcorona.dem.DEM
        Volume DEM (cm^-3); parameters may be arrays (a batch).
    band : Quantity
        Two wavelengths or two energies; or an (n, 2) Quantity / dict name → pair for several bands.
    distance : Quantity [length]
        Distance of the star (> 0); an array broadcasts against the DEM batch shape (numpy rules:
        one distance per DEM, or several distances for one DEM). Shapes that do not broadcast raise
        :class:`InputError` naming ``distance``.
    table : EmissivityTable, optional
        Default: the embedded table.
    abundances : str, dict or AbundanceSet
        Named set ("coronal", "photospheric", ...) or {element: abundance relative to H}.
    density : Quantity [cm^-3], optional
        Electron density (default 1e10 cm^-3), or ``pressure`` [K cm^-3] for constant pressure.
    photons : bool
        Photon flux (ph s-1 cm-2) instead of energy flux (erg s-1 cm-2).

    Returns
    -------
    Quantity, erg s-1 cm-2 (or ph s-1 cm-2), shape = broadcast of the DEM batch shape and the distance's
    shape (+ (n_bands,) for several bands).

    A large batch is worked through in chunks that fit the memory budget (:mod:`synthcorona.memory`);
    the numbers do not depend on the chunking.
    """
    if distance is None:
        raise InputError("distance is required for a flux; use luminosity() for the emitted power")
    return _band_quantity(dem, band, distance, table, abundances, density, pressure, photons)


def luminosity(dem, band, table=None, abundances="coronal", density=None, pressure=None,
               photons: bool = False) -> u.Quantity:
    """Band luminosity L = Σ_T EM(T) K_band(T) [erg s-1] (or ph s-1) of a volume DEM (into 4π).

    Shape: the DEM batch shape (+ (n_bands,) for several bands); arguments as for :func:`band_flux`.
    """
    return _band_quantity(dem, band, None, table, abundances, density, pressure, photons)


def _line_bin_contributions(centres, sigma, amp, edges_native, n_bins):
    """Bin-integrated Gaussians (flux-conserving) of lines at ``centres`` with widths ``sigma`` (native units)."""
    asc = edges_native[-1] > edges_native[0]
    e = edges_native if asc else edges_native[::-1]
    out = np.zeros(n_bins)
    lo_i = np.searchsorted(e, centres - 8 * sigma, side="right") - 1
    hi_i = np.searchsorted(e, centres + 8 * sigma, side="left")
    span = int(np.max(hi_i - lo_i)) if centres.size else 0
    if span > 5000:
        raise InputError(f"line broadening spans {span} bins; use a coarser grid or a smaller FWHM")
    lo_i = np.clip(lo_i, 0, e.size - 1)
    s2 = np.sqrt(2.0) * sigma
    for off in range(span + 1):
        j = lo_i + off
        ok = j < e.size - 1
        if not np.any(ok):
            break
        jj = j[ok]
        frac = 0.5 * (erf((e[jj + 1] - centres[ok]) / s2[ok]) - erf((e[jj] - centres[ok]) / s2[ok]))
        np.add.at(out, jj, amp[ok] * frac)
    return out if asc else out[::-1]


def _unbroadened_line_bins(e_line: np.ndarray, amp: np.ndarray, grid: SpectralGrid) -> np.ndarray:
    """Each line's whole flux in the bin holding its energy (delta profiles), in the user's bin order."""
    edges_e = grid.energy_edges
    asc = edges_e[-1] > edges_e[0]
    ee = edges_e if asc else edges_e[::-1]
    idx = np.searchsorted(ee, e_line, side="right") - 1
    ok = (idx >= 0) & (idx < grid.n)
    line_bins = np.bincount(idx[ok], weights=amp[ok], minlength=grid.n)
    return line_bins if asc else line_bins[::-1]


def line_sigma(prep: PreparedTable, lines: np.ndarray, w: np.ndarray, sel: np.ndarray, centres: np.ndarray,
               unit: u.UnitBase, thermal_broadening: bool, fwhm) -> np.ndarray:
    """Gaussian sigma of each selected line, in the grid's unit (``centres`` are the line positions in it).

    Thermal Doppler width at the line's EM-weighted formation temperature T_eff:
    sigma = (lambda / c) sqrt(k T_eff / m_ion) (Rybicki & Lightman 1979, Radiative Processes in
    Astrophysics, sect. 10.6), with m_ion the element's atomic mass; an instrumental Gaussian of
    FWHM ``fwhm`` is added in quadrature (sigma = FWHM / (2 sqrt(2 ln 2))).
    """
    sigma = np.zeros(centres.size)
    if thermal_broadening:
        lt = lines * w[None, :]
        tot = lt.sum(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            t_eff = np.where(tot > 0, (lt @ (10 ** prep.table.logT)) / tot, 10 ** prep.table.logT[0])
        m = prep.table.mass_amu[prep.table.line_element_index[sel]] * AMU_G
        v_th = np.sqrt(K_B_CGS * t_eff / m)  # cm/s
        sigma = np.abs(centres) * v_th / C_CGS
    if fwhm is not None:
        f = as_quantity("fwhm", fwhm, unit, equivalencies=None)
        check_finite("fwhm", f)
        if np.ndim(f) != 0 or f.value <= 0:
            raise InputError(f"fwhm={fwhm} must be a single positive value", argument="fwhm")
        sigma = np.sqrt(sigma ** 2 + (f.value * _FWHM_TO_SIGMA) ** 2)
    return np.maximum(sigma, 1e-12 * np.abs(centres))


def _spectrum_attrs(prep: PreparedTable, q: u.Quantity, kind: str, photons: bool, thermal_broadening: bool, fwhm,
                    dem) -> dict:
    """Provenance and description attrs of a synthesized spectrum."""
    broaden = thermal_broadening or fwhm is not None
    attrs = prep.attrs()
    attrs.update({
        "units": q.unit.to_string(),
        "quantity": {"luminosity": "spectral luminosity (into 4 pi)", "flux": "spectral flux at the observer",
                     "intensity": "spectral intensity"}[kind],
        "photons_or_energy": "photons" if photons else "energy",
        "binning": "bin-integrated and divided by bin width (flux conserving)",
        "line_profile": ("thermal Doppler" if thermal_broadening else "") + (
            f" + Gaussian FWHM {fwhm}" if fwhm is not None else "") if broaden else "delta (all flux in one bin)",
        "dem": repr(dem),
    })
    return attrs


def _line_spectrum(prep: PreparedTable, grid: SpectralGrid, w: np.ndarray, photons: bool, thermal_broadening: bool,
                   fwhm) -> np.ndarray:
    """Line emission of one DEM (weights ``w``) in each bin of ``grid``, delta or Gaussian profiles."""
    e_lo, e_hi = grid.lo_hi_kev()
    lines = prep.line_values(photons)  # (L, T)
    e_line = prep.line_energy_kev
    e_min, e_max = e_lo.min(), e_hi.max()
    broaden = thermal_broadening or fwhm is not None
    margin = 0.05 if broaden else 0.0
    sel = (e_line >= e_min * (1 - margin)) & (e_line <= e_max * (1 + margin))
    amp = lines[sel] @ w  # (Lsel,)
    if grid.wavelength_axis:
        centres = (HC_KEV_ANGSTROM / e_line[sel]) * u.AA
        centres = centres.to_value(grid.unit)
    else:
        centres = (e_line[sel] * u.keV).to_value(grid.unit)
    if not broaden:
        return _unbroadened_line_bins(e_line[sel], amp, grid)
    sigma = line_sigma(prep, lines[sel], w, sel, centres, grid.unit, thermal_broadening, fwhm)
    return _line_bin_contributions(centres, sigma, amp, grid.native_edges, grid.n)


def synthesize(dem, wavelength=None, energy=None, table=None, abundances="coronal", density=None, pressure=None,
               distance=None, photons: bool = False, thermal_broadening: bool = False, fwhm=None,
               edges: bool = False) -> xr.DataArray:
    """Spectrum of a DEM on a wavelength or energy grid, bin-integrated (flux conserved for any bin width).

    Parameters
    ----------
    dem : synthcorona.dem.DEM
        A single DEM (batch shape ()).
    wavelength, energy : Quantity
        Bin centres (or edges with ``edges=True``) in wavelength or energy units; give one.
    table, abundances, density, pressure : see :func:`band_flux`.
    distance : Quantity, optional
        One distance (a scalar): flux at the observer; otherwise luminosity (volume DEM) or intensity
        (column DEM).
    photons : bool
        Photon units instead of energy units.
    thermal_broadening : bool
        Gaussian thermal Doppler profiles at each line's EM-weighted formation temperature.
    fwhm : Quantity, optional
        Gaussian instrumental FWHM in wavelength or energy units (same kind as the grid).

    Returns
    -------
    xarray.DataArray
        Spectral density per unit of the grid (per Angstrom or per keV), dims ("wavelength",)
        or ("energy",); ``attrs`` give units, quantity, photons/energy, abundances, density,
        table provenance.

    A batch of DEMs or an array of distances raises :class:`InputError` (use :func:`band_flux`);
    a grid whose spectrum would need more memory than the budget (:func:`spectrum_nbytes`,
    :mod:`synthcorona.memory`) raises :class:`~synthcorona.errors.MemoryBudgetError` before anything
    is allocated.
    """
    if (wavelength is None) == (energy is None):
        raise InputError("give exactly one of wavelength= or energy= (bin centres, or edges with edges=True)")
    gname = "wavelength" if wavelength is not None else "energy"
    graw = wavelength if wavelength is not None else energy
    check_dem(dem)
    if dem.batch_shape != ():
        raise InputError(f"synthesize takes one DEM; got a batch of shape {dem.batch_shape} (use band_flux for "
                         "batches)", argument="dem")
    if distance is not None and np.ndim(distance) != 0:
        raise InputError(f"distance has shape {np.shape(distance)}: synthesize takes one distance (use band_flux "
                         "for several)", argument="distance")
    prep = prepare(table, abundances, density, pressure)
    n_bins = max(np.size(graw) - (1 if edges else 0), 0)
    check_allocation(f"spectrum of {n_bins:,} bins", spectrum_nbytes(n_bins, prep), f"{gname} (fewer bins)")
    grid = SpectralGrid(gname, graw, edges=edges)
    if wavelength is not None and not grid.wavelength_axis:
        raise u.UnitsError(f"wavelength has units '{graw.unit}': expected a length (use energy= for energies)")
    if energy is not None and grid.wavelength_axis:
        raise u.UnitsError(f"energy has units '{graw.unit}': expected an energy (use wavelength= for wavelengths)")
    w, em_unit = dem_weights(dem, prep)
    e_lo, e_hi = grid.lo_hi_kev()
    # continuum
    spec_bins = prep.cont_integral_weighted(e_lo, e_hi, w, photons)  # per bin
    spec_bins = spec_bins + _line_spectrum(prep, grid, w, photons, thermal_broadening, fwhm)
    scale, extra_unit, kind = _output_scale(em_unit, distance)
    density_per_unit = spec_bins / grid.widths * scale
    base = (u.ph if photons else u.erg) / u.s
    unit = base * em_unit * u.cm ** 3 * extra_unit / grid.unit
    q = u.Quantity(density_per_unit, unit)
    if kind == "intensity":
        q = q.to(base / u.cm ** 2 / u.sr / grid.unit)
    elif kind == "flux":
        q = q.to(base / u.cm ** 2 / grid.unit)
    else:
        q = q.to(base / grid.unit)
    attrs = _spectrum_attrs(prep, q, kind, photons, thermal_broadening, fwhm, dem)
    return xr.DataArray(q.value, dims=(gname,), coords={gname: (gname, grid.centres, {"units": grid.unit.to_string()})},
                        attrs=attrs, name="spectrum")


def radiative_loss(temperature, table=None, abundances="coronal", density=None, pressure=None) -> u.Quantity:
    """Radiative loss function Λ(T) = total emitted power / (n_e n_H) [erg cm3 s-1].

    Sum over all table lines and the continuum over the full table energy grid
    (1 eV–50 keV) plus the analytic exponential free-free tail beyond 50 keV (see code),
    interpolated linearly in log Λ–log T between table nodes.
    Temperatures outside the table grid raise :class:`InputError`.
    """
    t = as_quantity("temperature", temperature, u.K)
    check_finite("temperature", t)
    if np.any(t.value <= 0):
        raise InputError(f"temperature must be > 0 K; got {t.value[t.value <= 0][:3]}")
    prep = prepare(table, abundances, density, pressure)
    logt = prep.table.check_logT("temperature", np.log10(t.value))
    # continuum beyond the table's last energy E_max: the exponential Wien tail of free-free emission,
    # C(E) = C(E_max) exp(-(E - E_max)/kT) (Rybicki & Lightman 1979 eq. 5.14b with the Gaunt factor held at its
    # E_max value), integrated analytically: C(E_max) kT. It matters only above ~1e8 K (16 % of the free-free
    # power lies above 50 keV at 3e8 K) and errs by a few per cent of that share (slowly falling Gaunt factor).
    kt_kev = 10 ** prep.table.logT * K_B_KEV
    tail = prep.cont[:, -1] * kt_kev
    lam_nodes = prep.line_power.sum(axis=0) + prep.cont_cum[:, -1] + tail
    if not np.all(prep.valid_T):
        inside = prep.valid_T[np.clip(np.searchsorted(prep.table.logT, logt), 0, prep.table.logT.size - 1)]
        if not np.all(inside):
            raise InputError("temperature: at some requested temperatures the constant-pressure density leaves the table")
    lam = 10 ** np.interp(logt, prep.table.logT, np.log10(np.maximum(lam_nodes, 1e-300)))
    return u.Quantity(lam, u.erg * u.cm ** 3 / u.s)


_ROMAN = ((10, "X"), (9, "IX"), (5, "V"), (4, "IV"), (1, "I"))


def ion_label(z: int, stage: int) -> str:
    """Spectroscopic label of an ion: element symbol and stage in Roman numerals (26, 9 -> "Fe IX")."""
    from .abundances import ELEMENTS

    n, roman = int(stage), ""
    for value, numeral in _ROMAN:
        while n >= value:
            roman += numeral
            n -= value
    return f"{ELEMENTS[int(z) - 1]} {roman}"


def strongest_lines(dem, wavelength_range, table=None, abundances="coronal", density=None, pressure=None,
                    n: int = 10) -> xr.Dataset:
    """The ``n`` lines of a DEM with the largest luminosity in a wavelength (or energy) range, brightest first.

    Luminosity of a line = sum over the table's temperature nodes of EM_i x G(T_i) x A_el (erg s-1 into
    4 pi for a volume DEM), the same line sum that :func:`synthesize` places in its bins.

    Returns
    -------
    xarray.Dataset
        Over ``line``: ``wavelength`` [Angstrom], ``ion`` (e.g. "Fe IX"), ``luminosity`` (units in attrs:
        erg s-1 for a volume DEM, erg s-1 cm-2 sr-1 x 4 pi for a column DEM), with the table's provenance.
    """
    band = Band.coerce(wavelength_range, "wavelength_range")
    if not isinstance(n, (int, np.integer)) or n < 1:
        raise InputError(f"n={n!r} must be an integer >= 1", argument="n")
    prep = prepare(table, abundances, density, pressure)
    w, em_unit = dem_weights(dem, prep)
    if w.ndim != 1:
        raise InputError(f"strongest_lines takes one DEM; got a batch of shape {w.shape[:-1]}", argument="dem")
    lo, hi = band.energy_kev
    e = prep.line_energy_kev
    sel = np.flatnonzero((e >= lo) & (e <= hi))
    lum = prep.line_power[sel] @ w
    order = sel[np.argsort(lum)[::-1][:n]]
    values = np.sort(lum)[::-1][:n]
    tab = prep.table
    ions = [ion_label(z, s) for z, s in zip(tab.line_Z[order], tab.line_ion[order])]
    attrs = prep.attrs()
    attrs.update({"wavelength_range": band.range_text, "dem": repr(dem)})
    return xr.Dataset({"wavelength": ("line", tab.line_wavelength[order], {"units": "Angstrom"}),
                       "ion": ("line", np.array(ions, dtype=object)),
                       "luminosity": ("line", values, {"units": (u.erg / u.s * em_unit * u.cm ** 3).to_string()})},
                      attrs=attrs)
