"""Write the example instrument responses of this folder: an invented, generic detector (no real instrument).

    python examples/responses/make_example_responses.py [FOLDER]

writes into FOLDER (default: this script's folder):

* ``example_softx.arf``: OGIP ancillary response (effective area) of an invented small soft-X-ray
  telescope, written with :func:`synthcorona.instruments.ogip.write_arf`;
* ``example_softx.rmf``: its OGIP redistribution matrix (Gaussian energy resolution, 512 channels of
  20 eV), written with :func:`synthcorona.instruments.ogip.write_rmf`;
* ``example_euv_area.txt`` and ``example_euv_area.ecsv``: the same invented EUV bandpass as a
  plain-text area table (``# units:`` header line) and as ECSV.

Every curve below is an invented smooth function chosen to look like a plausible small instrument;
none is the calibration of any real telescope or detector, and the files say so in their headers.
docs/own_response.md explains the formats; tests/instruments/test_example_responses.py checks the
shipped files against independent computations and against this script.
"""
import pathlib
import sys

import astropy.units as u
import numpy as np
from astropy.io import fits
from astropy.table import QTable
from scipy.special import erf

from synthcorona.instruments.ogip import write_arf, write_rmf

NOTE = ("Invented generic example for the synthcorona documentation: not the calibration of any real "
        "telescope or detector.")

# ---------------------------------------------------------------- soft X-ray: ARF + RMF
#: photon-energy bins of the ARF and the RMF: 400 bins, log-spaced over 0.1-10 keV
ENERGY_EDGES_KEV = np.geomspace(0.1, 10.0, 401)
#: channel bins (EBOUNDS): 512 channels of 20 eV from 0 keV, numbered from 1
CHANNEL_EDGES_KEV = np.arange(513) * 0.02
FIRST_CHANNEL = 1
#: matrix elements at or below this are not stored (LO_THRES)
RMF_THRESHOLD = 1e-6


def softx_area_cm2(e_kev):
    """Invented effective area (cm^2) at photon energy ``e_kev``: 120 cm^2 times a low-energy cut-off (a
    filter, exp[-(0.25 keV / E)^2]) and a high-energy roll-off (a mirror, 1 / [1 + (E / 2.5 keV)^4])."""
    e = np.asarray(e_kev, dtype=float)
    return 120.0 * np.exp(-(0.25 / e) ** 2) / (1.0 + (e / 2.5) ** 4)


def softx_fwhm_kev(e_kev):
    """Invented energy resolution: FWHM(E) = 0.05 keV + 0.05 keV * sqrt(E / 1 keV)."""
    return 0.05 + 0.05 * np.sqrt(np.asarray(e_kev, dtype=float))


def softx_matrix():
    """Redistribution matrix (n_channels, n_energy): a Gaussian of FWHM :func:`softx_fwhm_kev` at each bin's
    geometric-mean energy, integrated over each channel's EBOUNDS interval (exact, with erf). The part of
    the Gaussian outside 0-10.24 keV is lost, so a column sums to slightly less than 1 at the lowest energies."""
    lo, hi = ENERGY_EDGES_KEV[:-1], ENERGY_EDGES_KEV[1:]
    centre = np.sqrt(lo * hi)
    sigma = softx_fwhm_kev(centre) / (2.0 * np.sqrt(2.0 * np.log(2.0)))
    z = (CHANNEL_EDGES_KEV[:, None] - centre[None, :]) / (np.sqrt(2.0) * sigma[None, :])
    cdf = 0.5 * (1.0 + erf(z))
    return np.diff(cdf, axis=0)


def softx_arf_area():
    """Bin-averaged area of each ARF bin (cm^2): the mean of :func:`softx_area_cm2` over 16 points per bin."""
    lo, hi = ENERGY_EDGES_KEV[:-1], ENERGY_EDGES_KEV[1:]
    t = (np.arange(16) + 0.5) / 16.0
    return softx_area_cm2(lo[:, None] + (hi - lo)[:, None] * t[None, :]).mean(axis=1)


# ---------------------------------------------------------------- EUV: area table
#: wavelengths of the EUV area table: 150-215 Angstrom in 1 Angstrom steps
EUV_WAVELENGTH_A = np.arange(150.0, 216.0, 1.0)


def euv_area_cm2(wavelength_a):
    """Invented EUV bandpass (cm^2): a Gaussian of 2.5 cm^2 peak at 180 Angstrom, sigma 5 Angstrom, rounded to
    1e-4 cm^2 (as a table would be printed)."""
    w = np.asarray(wavelength_a, dtype=float)
    return np.round(2.5 * np.exp(-0.5 * ((w - 180.0) / 5.0) ** 2), 4)


def _add_comments(path: pathlib.Path, lines) -> None:
    """Add COMMENT cards to every header of a FITS file and rewrite it with fresh CHECKSUM/DATASUM."""
    with fits.open(path) as hdul:
        hdul.readall()
        for h in hdul:
            for line in lines:
                h.header.add_comment(line)
        hdul.writeto(path, overwrite=True, checksum=True)


def write_all(folder) -> list[pathlib.Path]:
    """Write the four example files into ``folder``; returns their paths."""
    out = pathlib.Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    e_lo, e_hi = ENERGY_EDGES_KEV[:-1] * u.keV, ENERGY_EDGES_KEV[1:] * u.keV
    arf = write_arf(out / "example_softx.arf", e_lo, e_hi, softx_arf_area() * u.cm**2,
                    telescope="EXAMPLE", instrument="SOFTX", overwrite=True)
    rmf = write_rmf(out / "example_softx.rmf", e_lo, e_hi, softx_matrix(), CHANNEL_EDGES_KEV[:-1] * u.keV,
                    CHANNEL_EDGES_KEV[1:] * u.keV, first_channel=FIRST_CHANNEL, threshold=RMF_THRESHOLD,
                    telescope="EXAMPLE", instrument="SOFTX", overwrite=True)
    _add_comments(arf, [NOTE, "Area: 120 cm2 * exp(-(0.25 keV/E)^2) / (1 + (E/2.5 keV)^4), averaged over each bin.",
                        "Written with synthcorona.instruments.ogip.write_arf by "
                        "examples/responses/make_example_responses.py"])
    _add_comments(rmf, [NOTE, "Gaussian redistribution, FWHM = 0.05 keV + 0.05 keV * sqrt(E / 1 keV);",
                        "EBOUNDS: 512 channels of 20 eV from 0 keV, numbered from 1.",
                        "Written with synthcorona.instruments.ogip.write_rmf by "
                        "examples/responses/make_example_responses.py"])

    area = euv_area_cm2(EUV_WAVELENGTH_A)
    txt = out / "example_euv_area.txt"
    header = "\n".join([NOTE, "Invented EUV bandpass: 2.5 cm2 peak at 180 Angstrom, Gaussian sigma 5 Angstrom.",
                        "Columns: wavelength, effective area (units on the next line).", "units: Angstrom cm2"])
    np.savetxt(txt, np.column_stack([EUV_WAVELENGTH_A, area]), fmt=["%.1f", "%.4f"], header=header)
    t = QTable([EUV_WAVELENGTH_A * u.AA, area * u.cm**2], names=["wavelength", "area"])
    t.meta["comments"] = [NOTE, "Invented EUV bandpass: 2.5 cm2 peak at 180 Angstrom, Gaussian sigma 5 Angstrom."]
    ecsv = out / "example_euv_area.ecsv"
    t.write(ecsv, format="ascii.ecsv", overwrite=True)
    return [arf, rmf, txt, ecsv]


if __name__ == "__main__":
    folder = sys.argv[1] if len(sys.argv) > 1 else pathlib.Path(__file__).resolve().parent
    for p in write_all(folder):
        print(f"wrote {p} ({p.stat().st_size} bytes)")
