"""The spectrum figure (synthcorona.plotting.spectrum) of a small synthetic spectrum."""
import astropy.units as u
import numpy as np
import pytest
import xarray as xr

from synthcorona.errors import InputError
from synthcorona.plotting.spectrum import plot_spectrum


def _spectrum():
    w = np.arange(100.0, 110.0, 1.0)
    v = np.array([0.0, 1e-14, 2e-13, 5e-15, 0.0, 1e-15, 3e-14, 0.0, 2e-16, 4e-15])
    return xr.DataArray(v, coords={"wavelength": ("wavelength", w, {"units": "Angstrom"})}, dims="wavelength",
                        attrs={"units": "erg / (Angstrom s cm2)"})


def test_one_log_line_with_six_decades_below_the_peak():
    spec = _spectrum()
    fig = plot_spectrum(spec, title="invented corona")
    (ax,) = fig.axes
    (line,) = ax.get_lines()
    np.testing.assert_array_equal(line.get_xdata(), spec["wavelength"].values)
    np.testing.assert_array_equal(line.get_ydata(), np.maximum(spec.values, 1e-300))
    assert ax.get_yscale() == "log"
    assert ax.get_ylim() == pytest.approx((2e-13 / 1e6, 6e-13), rel=1e-12)
    assert ax.get_xlabel() == "wavelength [Angstrom]" and ax.get_ylabel() == "flux density [erg / (Angstrom s cm2)]"
    assert ax.get_title() == "invented corona"


def test_refuses_what_is_not_a_spectrum():
    with pytest.raises(InputError, match="spectrum"):
        plot_spectrum(np.ones(3) * u.erg)


def test_strongest_lines_are_labelled_with_their_ion(table):
    # Fe IX 171.07 Angstrom dominates 165-180 Angstrom at log T = 5.9 (from memory, standard EUV spectroscopy;
    # the same check against the table is in tests/test_synthesis.py); here: the figure shows those labels
    import astropy.units as u
    import numpy as np

    import synthcorona as sc
    from synthcorona.plotting.spectrum import plot_spectrum
    from synthcorona.synthesis import strongest_lines

    dem = sc.IsothermalDEM(10 ** 5.9 * u.K, 1e50 * u.cm ** -3)
    spec = sc.synthesize(dem, wavelength=np.arange(165, 180, 0.05) * u.AA, table=table, density=1e9 * u.cm ** -3)
    lines = strongest_lines(dem, "165-180 Angstrom", table=table, density=1e9 * u.cm ** -3, n=4)
    fig = plot_spectrum(spec, lines=lines)
    labels = [t.get_text() for t in fig.axes[0].texts]
    assert len(labels) == 4 and labels[0] == f"Fe IX {float(lines['wavelength'][0]):.2f}"
