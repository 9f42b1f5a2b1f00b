"""Table builder: CHIANTI (through fiasco) → one emissivity table file (lines + continuum).

For every ion of the chosen elements, on a (log T, log n_e) grid, this computes

* line emissivities per unit element abundance, ``f_ion N_j A_ji ΔE / n_e``
  [erg cm3 s-1], the CHIANTI contribution function of Young et al. (2016, J. Phys.
  B 49, 074009, their eq. 3) without the abundance factor, from
  ``fiasco.Ion.contribution_function`` (level populations from the
  collisional-radiative model, two-ion model where CHIANTI has the data);
* continua per element: free-free (fiasco ``Ion.free_free``, Gaunt factors of
  Itoh et al. 2000 / Sutherland 1998), free-bound (``Ion.free_bound``, Verner &
  Yakovlev 1995 cross-sections for ground states, Karzas & Latter 1961 otherwise)
  and two-photon (``Ion.two_photon``) on a fixed log-uniform energy grid;
* ionization fractions from CHIANTI's default equilibrium file (``chianti.ioneq``).

Speed: the proton/electron density ratio (Young et al. 2003, ApJS 144, 135, eq. 7),
which fiasco recomputes for every ion and is the slowest step of a plain
contribution-function call, is computed once per temperature grid and handed to
every ion. Each ion's result is written to its own file in a work directory, so
an interrupted build resumes where it stopped, and ions run as parallel dask tasks
(``dask.distributed``: a local cluster of ``jobs`` worker processes, or any cluster given by
its scheduler address; see ``docs/distributed.md``).

Line selection (documented threshold ``line_threshold`` = *f*): at every grid point
(T, n_e), the weakest lines of an ion whose summed emissivity is below *f* times
that ion's total line emissivity are candidates for dropping; a line is kept if it
is not a candidate at *some* grid point. Hence at every grid point the dropped
lines of every ion carry less than *f* of that ion's line emission, and for any
abundances the dropped lines carry less than *f* of the total line emission of the
plasma; in any wavelength window holding at least a fraction *w* of the total line
emission they carry less than *f*/*w* of the window's emission. With the default
*f* = 1e-3 that bound alone is loose, so :func:`select_lines_windowed` also restores lines
until the dropped lines carry < 0.5 % of every 10 Angstrom window that holds >= 1 % of the
ion's emission.
"""
from __future__ import annotations

import datetime as _dt
import hashlib
import json
import logging
import os
import pathlib
import time
import uuid

import numpy as np

from ..cluster import dask_client, scheduler_from_env
from ..constants import DEFAULT_LOGT_GRID, HC_KEV_ANGSTROM
from ..errors import InputError
from ..io.table_file import write_table
from . import locate
from .line_selection import ION_PRESENCE, WINDOW_SIGNIFICANCE, WINDOW_TARGET, WINDOW_WIDTH, select_lines_windowed

__all__ = ["BuildSettings", "build_table", "default_elements", "DEFAULT_LOGT", "DEFAULT_LOG_DENSITY",
           "default_energy_grid"]

log = logging.getLogger(__name__)

#: Default temperature grid: log10 T = 4.5 ... 8.5 step 0.05 (81 points), the package's default log T grid.
DEFAULT_LOGT = DEFAULT_LOGT_GRID
#: Default electron densities: log10 n_e = 8 ... 12 cm^-3.
DEFAULT_LOG_DENSITY = np.array([8.0, 9.0, 10.0, 11.0, 12.0])
#: Elements kept by default: photospheric number abundance >= this (relative to H).
DEFAULT_MIN_ABUNDANCE = 1e-7
BUILDER_VERSION = "2"
#: Lines longward of this (1 eV photons, the low end of the continuum grid) are not stored [Angstrom].
MAX_WAVELENGTH = HC_KEV_ANGSTROM * 1e3
#: Line emissivities are computed only where the ion fraction is >= this fraction of its peak (else 0).
ION_FRACTION_FLOOR = 1e-6
#: Temperatures per level-population call (memory bound for large two-ion models).
T_CHUNK = 12
#: Factor bringing fiasco's per-steradian free-free emission to emission into 4 pi.
FF_TO_FOUR_PI = 4.0 * np.pi
_SYMBOLS = ["H", "He", "Li", "Be", "B", "C", "N", "O", "F", "Ne", "Na", "Mg", "Al", "Si", "P", "S", "Cl",
            "Ar", "K", "Ca", "Sc", "Ti", "V", "Cr", "Mn", "Fe", "Co", "Ni", "Cu", "Zn"]


def default_energy_grid(n: int = 1000) -> np.ndarray:
    """Continuum energy grid in keV: ``n`` points log-uniform from 1 eV to 50 keV."""
    return np.geomspace(1e-3, 50.0, n)


def default_elements(chianti_root: pathlib.Path, min_abundance: float = DEFAULT_MIN_ABUNDANCE) -> list[str]:
    """Elements whose solar photospheric abundance (the CHIANTI tree's
    ``sun_photospheric_2021_asplund.abund``, Asplund et al. 2021, A&A 653, A141) is
    >= ``min_abundance`` relative to H."""
    path = pathlib.Path(chianti_root) / "abundance" / "sun_photospheric_2021_asplund.abund"
    if not path.is_file():
        cands = sorted((pathlib.Path(chianti_root) / "abundance").glob("*photospheric*.abund"))
        if not cands:
            raise locate.ChiantiNotFoundError(f"no photospheric abundance file in {chianti_root}/abundance")
        path = cands[-1]
    out = []
    for line in path.read_text(errors="replace").splitlines():
        parts = line.split()
        if not parts or parts[0].strip() == "-1":
            break
        z, logab = int(parts[0]), float(parts[1])
        if z <= 30 and 10 ** (logab - 12.0) >= min_abundance:
            out.append(_SYMBOLS[z - 1])
    return out


class BuildSettings:
    """Grids and choices of one table build (everything that determines the result)."""

    def __init__(self, logT=None, log_density=None, energy=None, elements=None, line_threshold=1e-3,
                 ions=None, two_ion_max_levels=None):
        self.logT = np.asarray(DEFAULT_LOGT if logT is None else logT, dtype=float)
        self.log_density = np.asarray(DEFAULT_LOG_DENSITY if log_density is None else log_density, dtype=float)
        self.energy = np.asarray(default_energy_grid() if energy is None else energy, dtype=float)
        self.elements = list(elements) if elements is not None else None
        self.line_threshold = float(line_threshold)
        self.ions = list(ions) if ions is not None else None
        #: Use fiasco's two-ion level-population model (where CHIANTI has autoionization / level-resolved
        #: recombination data) only when the two ions together have at most this many levels (None: always).
        self.two_ion_max_levels = None if two_ion_max_levels is None else int(two_ion_max_levels)
        for name, arr in (("logT", self.logT), ("log_density", self.log_density), ("energy", self.energy)):
            if arr.ndim != 1 or arr.size < 2 or not np.all(np.diff(arr) > 0):
                raise InputError(f"{name} grid must be 1-D, strictly increasing, with >= 2 points")
        if not (0 <= self.line_threshold < 0.1):
            raise InputError(f"line_threshold={line_threshold} is outside the valid range [0, 0.1)")

    def signature(self, h5: pathlib.Path) -> str:
        """Hash of everything that determines per-ion results (names the work directory)."""
        h = hashlib.sha256()
        for arr in (self.logT, self.log_density, self.energy):
            h.update(np.ascontiguousarray(arr).tobytes())
        h.update(f"{h5.name}|{BUILDER_VERSION}|{self.two_ion_max_levels}".encode())  # lines selected at assembly
        return h.hexdigest()[:16]


# --------------------------------------------------------------------------- worker side

def _install_identity_cache() -> None:
    """Memoise plasmapy's element look-ups that fiasco repeats on every dataset access.

    fiasco asks plasmapy for an ion's atomic number/symbol/mass each time it reads a
    dataset (about 10 ms a call, hundreds of calls per ion); the answers never change.
    """
    import functools

    import fiasco.base as fbase
    import plasmapy.particles as pp

    for fn in ("atomic_number", "atomic_symbol", "element_name"):
        orig = getattr(pp, fn)
        if not hasattr(orig, "cache_info"):
            setattr(pp, fn, functools.lru_cache(maxsize=None)(orig))
    if not getattr(fbase.IonBase, "_synthcorona_mass_cached", False):
        @functools.lru_cache(maxsize=None)
        def _mass(name_roman):
            return pp.Particle(name_roman).mass

        fbase.IonBase.mass = property(lambda self: _mass(self.ion_name_roman))
        fbase.IonBase._synthcorona_mass_cached = True


def _install_pe_cache(temperature_k: np.ndarray, ratio: np.ndarray) -> None:
    """Make fiasco reuse one proton/electron ratio for this temperature grid (see module doc).

    Any temperature array made of nodes of the grid (e.g. a chunk of it) is served from the cache.
    """
    import astropy.units as u
    import fiasco.ions as fions

    orig = getattr(fions, "_synthcorona_original_pe", fions.proton_electron_ratio)
    fions._synthcorona_original_pe = orig
    grid = np.asarray(temperature_k, dtype=float)

    def cached(temperature, **kwargs):
        t = np.atleast_1d(temperature.to_value(u.K))
        i = np.clip(np.searchsorted(grid, t), 0, grid.size - 1)
        j = np.clip(i - 1, 0, grid.size - 1)
        i = np.where(np.abs(grid[j] - t) < np.abs(grid[i] - t), j, i)
        if np.allclose(grid[i], t, rtol=1e-10, atol=0):
            return u.Quantity(ratio[i])
        return orig(temperature, **kwargs)

    fions.proton_electron_ratio = cached


def _ion_lines(ion, ion_name, T, dens, frac, h5, two_ion_max_levels) -> dict:
    """Bound-bound lines of one ion: wavelengths, level indices, observed flags and contribution functions
    (n_lines, n_density, n_T) per unit abundance, where the ion exists (worker side; imports fiasco)."""
    import astropy.units as u
    import fiasco
    from fiasco.util.exceptions import MissingDatasetException, MissingIonError

    nT, nn = T.size, dens.size
    out = {}
    wl = np.zeros(0)
    eps = np.zeros((0, nn, nT))
    up = lo = obs = np.zeros(0, dtype=np.int32)
    has_lines = all(ion._has_dataset(d) for d in ("elvlc", "wgfa", "scups")) and np.any(frac > 0)
    if has_lines:
        # Level populations only where the ion exists (fraction >= ION_FRACTION_FLOOR of its peak),
        # in chunks of temperatures to bound memory (two-ion models reach ~1500 levels).
        t_idx = np.flatnonzero(frac >= ION_FRACTION_FLOOR * frac.max())
        two_ion = ion._has_dataset("auto") or ion._has_dataset("rrlvl")
        if two_ion and two_ion_max_levels is not None:
            try:
                n_next = ion.next_ion().n_levels
            except (MissingIonError, MissingDatasetException):
                n_next = 0
            two_ion = ion.n_levels + n_next <= two_ion_max_levels
        out["two_ion"] = bool(two_ion)
        g = None
        for k in range(0, t_idx.size, T_CHUNK):
            sub = t_idx[k:k + T_CHUNK]
            ion_k = fiasco.Ion(ion_name, T[sub], hdf5_dbase_root=h5, abundance=1.0)
            gk = ion_k.contribution_function(dens, use_two_ion_model=two_ion).to_value(
                u.erg * u.cm ** 3 / u.s)  # (t, n, lines)
            if g is None:
                g = np.zeros((nT,) + gk.shape[1:])
            g[sub] = gk
        tr = ion.transitions
        bb = tr.is_bound_bound
        wl = tr.wavelength[bb].to_value(u.AA)
        up = tr.upper_level[bb].astype(np.int32)
        lo = tr.lower_level[bb].astype(np.int32)
        obs = tr.is_observed[bb].astype(np.int8)
        eps = np.transpose(g, (2, 1, 0))
        eps = np.where(np.isfinite(eps) & (eps > 0), eps, 0.0)
        keep = (wl < MAX_WAVELENGTH) & np.any(eps > 0, axis=(1, 2))
        wl, up, lo, obs, eps = wl[keep], up[keep], lo[keep], obs[keep], eps[keep].astype(np.float32)
    out.update(wavelength=wl, upper=up, lower=lo, observed=obs, emissivity=eps, n_all_lines=int(has_lines and bb.sum()))
    return out


def _ion_continua(ion, ion_name, energy, dens, frac) -> dict:
    """Free-free, free-bound and two-photon continua of one ion per unit abundance, erg cm3 s-1 keV-1:
    ``ff``, ``fb`` (n_T, n_E) and ``tp`` (n_density, n_T, n_E) (worker side; imports fiasco)."""
    import astropy.units as u
    from fiasco.util.exceptions import MissingDatasetException, MissingIonError

    nT, nn, nE = frac.size, dens.size, energy.size
    # ---- continua, per keV: eps_E = eps_lambda * lambda / E
    wave = (energy * u.keV).to(u.AA, equivalencies=u.spectral())
    jac = (wave.to_value(u.AA) / energy)  # Angstrom per keV
    unit_l = u.erg * u.cm ** 3 / u.s / u.AA
    ff = np.zeros((nT, nE))
    fb = np.zeros((nT, nE))
    tp = np.zeros((nn, nT, nE))
    if ion.charge_state >= 1 and np.any(frac > 0):
        ff = ion.free_free(wave).to_value(unit_l) * frac[:, None] * jac
    try:
        nxt = ion.next_ion()
        f_next = nxt.ionization_fraction.value
        if np.any(f_next > 0) and ion._has_dataset("fblvl"):
            fb = ion.free_bound(wave).to_value(unit_l) * f_next[:, None] * jac
    except (MissingDatasetException, MissingIonError, KeyError, ValueError, IndexError) as exc:
        log.debug("no free-bound for %s: %s", ion_name, exc)
    if (ion.hydrogenic or ion.helium_like) and np.any(frac > 0):
        for i, d in enumerate(dens):
            try:
                t2 = ion.two_photon(wave, d).to_value(unit_l)
            except MissingDatasetException:
                break
            t2 = t2.reshape(nT, nE)
            tp[i] = t2 * frac[:, None] * jac
    for arr in (ff, fb, tp):
        arr[~np.isfinite(arr)] = 0.0
        np.clip(arr, 0.0, None, out=arr)
    return {"ff": ff, "fb": fb, "tp": tp}


def compute_ion(ion_name: str, h5: str, logT: np.ndarray, log_density: np.ndarray, energy: np.ndarray,
                pe_ratio: np.ndarray, two_ion_max_levels=None) -> dict:
    """Lines and continua of one ion (worker function; imports fiasco).

    Returns a dict of numpy arrays: ``wavelength`` (Å), ``upper``, ``lower``,
    ``observed``, ``emissivity`` (n_lines, n_density, n_T) erg cm3 s-1 per unit
    abundance; ``ff``, ``fb`` (n_T, n_E) and ``tp`` (n_density, n_T, n_E) in
    erg cm3 s-1 keV-1 per unit abundance; ``Z``, ``stage``, ``mass_amu``, ``ip_ev``.
    """
    import warnings

    import astropy.units as u
    import fiasco
    from fiasco.util.exceptions import MissingDatasetException

    fiasco.log.setLevel("ERROR")
    warnings.filterwarnings("ignore")
    T = 10 ** logT * u.K
    _install_identity_cache()
    _install_pe_cache(T.to_value(u.K), pe_ratio)
    dens = 10 ** log_density * u.cm ** -3
    ion = fiasco.Ion(ion_name, T, hdf5_dbase_root=h5, abundance=1.0)
    nT = logT.size
    out = {"Z": ion.atomic_number, "stage": ion.ionization_stage, "mass_amu": ion.mass.to_value(u.u)}
    try:
        out["ip_ev"] = ion.ionization_potential.to_value(u.eV)
    except (MissingDatasetException, KeyError, AttributeError):
        out["ip_ev"] = np.nan
    try:
        frac = ion.ionization_fraction.value
    except MissingDatasetException:
        frac = np.zeros(nT)
    out.update(_ion_lines(ion, ion_name, T, dens, frac, h5, two_ion_max_levels))
    out.update(_ion_continua(ion, ion_name, energy, dens, frac))
    return out


def _run_one(args):
    """One ion as a task: compute it and write ``path`` atomically (skipped when ``path`` exists).

    The result goes to a uniquely named temporary file in the same directory first and is
    then renamed onto ``path`` (``os.replace``, atomic on POSIX file systems), so a task killed
    midway leaves no partial result and two attempts of one ion cannot mix their output.
    Returns (ion name, compute seconds).
    """
    name, h5, logT, logn, energy, pe, thr, path = args
    path = pathlib.Path(path)
    if path.exists():  # done by an earlier attempt or run: never recomputed
        with np.load(path) as done:
            return name, float(done["seconds"]) if "seconds" in done else float("nan")
    if not pathlib.Path(h5).is_file():
        raise FileNotFoundError(f"CHIANTI HDF5 file {h5} is not visible on this worker ({os.uname().nodename}); "
                                "on a cluster it must be on storage shared by all workers (docs/distributed.md)")
    t0 = time.perf_counter()
    res = compute_ion(name, h5, logT, logn, energy, pe, thr)
    res["seconds"] = time.perf_counter() - t0
    tmp = path.with_name(f"{path.stem}.{os.getpid()}-{uuid.uuid4().hex[:8]}.partial.npz")
    try:
        np.savez(tmp, **res)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return name, res["seconds"]


def _run_serial(todo: list, bar) -> dict:
    """Run the ion tasks one after another in this process; returns {ion: seconds}."""
    timings = {}
    for args in todo:
        name, sec = _run_one(args)
        timings[name] = sec
        bar.update(1)
    return timings


def _run_dask(todo: list, bar, client, retries: int) -> dict:
    """Run the ion tasks on a dask cluster; returns {ion: seconds}.

    Each ion is one task (``retries`` re-runs after an exception in the task). A worker that
    dies mid-ion loses only that ion: the scheduler re-assigns it, and if the scheduler gives
    up on it (``KilledWorker``) it is submitted again, up to ``retries`` times.
    """
    from distributed import as_completed
    from distributed.scheduler import KilledWorker

    attempts = {}
    by_future = {}

    def submit(args):
        name = args[0]
        attempts[name] = attempts.get(name, 0) + 1
        fut = client.submit(_run_one, args, key=f"synthcorona-ion-{name}-{uuid.uuid4().hex[:12]}", pure=False,
                            retries=retries)
        by_future[fut.key] = args
        return fut

    timings = {}
    ac = as_completed([submit(a) for a in todo])
    for fut in ac:
        args = by_future.pop(fut.key)
        try:
            name, sec = fut.result()
        except KilledWorker:
            if attempts[args[0]] > retries:
                raise
            log.warning("ion %s: worker lost, resubmitting (attempt %d)", args[0], attempts[args[0]] + 1)
            ac.add(submit(args))
            continue
        finally:
            fut.release()
        if not pathlib.Path(args[-1]).exists():
            raise FileNotFoundError(
                f"ion {name}: the worker wrote {args[-1]} but it is not visible here; the work directory must be "
                "on storage shared by this machine and all workers (docs/distributed.md)")
        timings[name] = sec
        bar.update(1)
    return timings


def _ion_list(h5: pathlib.Path, elements: list[str]) -> list[str]:
    import fiasco

    wanted = {e.lower() for e in elements}
    out = []
    for name in fiasco.list_ions(h5):  # e.g. "Fe 12"
        sym, stage = name.split()
        if sym.lower() in wanted:
            out.append(f"{sym.lower()}_{int(stage)}")
    return out


def proton_electron_ratio(h5: pathlib.Path, logT: np.ndarray, work: pathlib.Path) -> np.ndarray:
    """n_p/n_e on the grid (fiasco, Young et al. 2003 eq. 7), computed once and cached in ``work``."""
    path = work / "proton_electron_ratio.npy"
    if path.exists():
        return np.load(path)
    import astropy.units as u
    import fiasco

    fiasco.log.setLevel("ERROR")
    _install_identity_cache()  # the same answers, without repeating plasmapy's element look-ups per ion
    ratio = fiasco.proton_electron_ratio(10 ** logT * u.K, hdf5_dbase_root=h5).value
    np.save(path, ratio)
    return ratio


def _substitution_note(sub: dict, ions: list[str]) -> str:
    """Text listing the ions of this build whose level-resolved CHIANTI files come from an older release."""
    used = [f"{n} {sub[n]}" for n in ions if n in sub]
    if not used:
        return "none (all ions from the release named in chianti_version)"
    return "level-resolved files from an older release: " + "; ".join(used)


def _collect_ions(work: pathlib.Path, ions, settings: BuildSettings):
    """Read the per-ion files in ion-list order and apply the line selection: (results, lines before, lines kept,
    compute seconds per ion)."""
    results = {}
    n_all = n_kept = 0
    ion_seconds = {}
    for name in ions:
        r = dict(np.load(work / "ions" / f"{name}.npz"))
        eps = r["emissivity"].astype(np.float64)
        keep = select_lines_windowed(r["wavelength"], eps, settings.line_threshold)
        n_all += keep.size
        n_kept += int(keep.sum())
        eps = eps[keep]
        if eps.size:
            tot = eps.sum(axis=0)
            eps[:, tot < ION_PRESENCE * tot.max()] = 0.0
        for key in ("wavelength", "upper", "lower", "observed"):
            r[key] = r[key][keep]
        r["emissivity"] = eps
        r["two_ion"] = bool(r.get("two_ion", True))
        ion_seconds[name] = float(r.get("seconds", np.nan))
        # fiasco's Ion.free_free is per steradian (Phillips et al. 2008, eq. 4.114), unlike its free_bound,
        # two_photon and contribution_function, which are into 4 pi: bring it to 4 pi.
        r["ff"] = r["ff"] * FF_TO_FOUR_PI
        results[name] = r
    return results, n_all, n_kept, ion_seconds


def _table_attrs(src, ions, elements, settings: BuildSettings, results, n_all, n_kept, timings, ion_seconds,
                 t_start) -> dict:
    """Provenance attrs of a built table: CHIANTI source and substitutions, fiasco version, line selection,
    timing."""
    import fiasco

    return {
        "chianti_version": src.version,
        "chianti_origin": src.origin,
        "chianti_provenance": src.provenance_note or "no PROVENANCE.md found beside the database",
        "chianti_substituted_ions": _substitution_note(locate.substituted_ions(src), ions),
        "fiasco_version": fiasco.__version__,
        "ioneq": "chianti (CHIANTI default equilibrium file chianti.ioneq of the database above)",
        "proton_electron_ratio": "fiasco.proton_electron_ratio (Young et al. 2003 eq. 7), fiasco default "
                                 "abundance file, summed over the elements of this table, computed once per grid",
        "line_threshold": settings.line_threshold,
        "line_selection": (f"synthcorona.atomic.builder.select_lines_windowed: per ion, dropped lines carry < "
                           f"line_threshold of the ion's line emission at every grid point where the ion is present "
                           f"(total >= {ION_PRESENCE:g} of its maximum; elsewhere stored as 0), and < {WINDOW_TARGET:g} "
                           f"of any {WINDOW_WIDTH:g} A window holding >= {WINDOW_SIGNIFICANCE:g} of the ion's line "
                           f"emission; lines longward of {MAX_WAVELENGTH:.1f} A are not stored"),
        "lines_kept": f"{n_kept} of {n_all}",
        "build_date": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "builder_version": BUILDER_VERSION,
        "elements": " ".join(elements),
        "ions": " ".join(ions),
        "two_ion_model": ("fiasco two-ion level populations where CHIANTI has the data"
                          + ("" if settings.two_ion_max_levels is None else
                             f" and the two ions have <= {settings.two_ion_max_levels} levels together")
                          + "; single-ion model for: " + (" ".join(n for n in ions if not results[n]["two_ion"])
                                                          or "none")),
        "build_seconds_per_ion": json.dumps({k: round(timings[k], 2) for k in ions if k in timings}),
        "ion_compute_seconds": json.dumps({k: round(v, 2) for k, v in ion_seconds.items()}),
        "build_wall_seconds_this_run": round(time.perf_counter() - t_start, 1),
    }


def build_table(output, chianti=None, settings: BuildSettings | None = None, jobs: int = 1,
                work_dir=None, progress: bool = True, scheduler=None, retries: int = 2,
                **kwargs) -> pathlib.Path:
    """Build an emissivity table file from a CHIANTI database (resumable, parallel).

    Each ion is one task; with ``jobs`` > 1 or a ``scheduler`` the tasks run as dask
    (``dask.distributed``) tasks, else one after another in this process. The table is
    assembled from the per-ion files in the order of the ion list, so it is the same, byte
    for byte in its data and content hash, whichever way and in whatever order the ions ran.

    Parameters
    ----------
    output : path
        netCDF file to write (see ``docs/table_format.md``).
    chianti : path, optional
        ASCII CHIANTI tree or ``.tar.xz`` (else ``SYNTHCORONA_CHIANTI``, else fiasco's configuration).
    settings : BuildSettings, optional
        Grids, elements, line threshold (keyword arguments of BuildSettings are accepted directly).
    jobs : int
        1: run in this process (unless ``scheduler`` or ``$SYNTHCORONA_SCHEDULER`` is set);
        > 1: a local dask cluster of that many worker processes (one thread each); 0: one
        worker per CPU core. Ignored for a remote scheduler.
    work_dir : path, optional
        Where per-ion results are kept (default: the user cache); rerunning with
        the same settings resumes from them. With a remote scheduler it must be a directory
        that this machine and every worker see at the same path (shared file system).
    progress : bool
        Show a progress bar (ions done, time left).
    scheduler : distributed.Client, "local" or address, optional
        Where the ion tasks run (see :mod:`synthcorona.cluster`); default
        ``$SYNTHCORONA_SCHEDULER``, else decided by ``jobs``.
    retries : int
        Times an ion is run again after its task failed or its worker died (>= 0).

    Raises
    ------
    DependencyError
        fiasco (0.8.2, Python >= 3.12) is not installed.
    """
    t_start = time.perf_counter()
    if settings is None:
        settings = BuildSettings(**kwargs)
    elif kwargs:
        raise InputError(f"give either settings or keyword grids, not both: {sorted(kwargs)}")
    if int(jobs) < 0:
        raise InputError(f"jobs={jobs} is outside the valid range [0, {os.cpu_count()}] (0: one per CPU core)")
    if int(retries) < 0:
        raise InputError(f"retries={retries} is outside the valid range [0, inf)")
    scheduler = scheduler_from_env(scheduler)
    locate.require_fiasco("building an emissivity table")     # after the argument checks: they need no fiasco
    import fiasco
    from tqdm import tqdm

    fiasco.log.setLevel("ERROR")
    src = locate.find_chianti(chianti)
    elements = settings.elements or default_elements(src.root)
    bad = [e for e in elements if e not in _SYMBOLS]
    if bad:
        raise InputError(f"elements={bad}: unknown element symbol(s); valid: {', '.join(_SYMBOLS)}")
    h5 = locate.ensure_hdf5(src, elements, progress=False)
    ions = settings.ions or _ion_list(h5, elements)
    work = pathlib.Path(work_dir) if work_dir else locate.cache_dir() / "build" / settings.signature(h5)
    (work / "ions").mkdir(parents=True, exist_ok=True)
    pe = proton_electron_ratio(h5, settings.logT, work)
    todo, done = [], 0
    for name in ions:
        path = work / "ions" / f"{name}.npz"
        if path.exists():
            done += 1
        else:
            todo.append((name, str(h5), settings.logT, settings.log_density, settings.energy, pe,
                         settings.two_ion_max_levels, path))
    bar = tqdm(total=len(ions), initial=done, unit="ion", desc="ions", disable=not progress)
    if (scheduler is None and int(jobs) == 1) or not todo:
        timings = _run_serial(todo, bar)
    else:
        n_local = int(jobs) if int(jobs) > 0 else (os.cpu_count() or 1)
        with dask_client(scheduler if scheduler is not None else "local", n_workers=n_local) as client:
            timings = _run_dask(todo, bar, client, int(retries))
    bar.close()
    results, n_all, n_kept, ion_seconds = _collect_ions(work, ions, settings)
    attrs = _table_attrs(src, ions, elements, settings, results, n_all, n_kept, timings, ion_seconds, t_start)
    return write_table(output, results, settings, elements, attrs)
