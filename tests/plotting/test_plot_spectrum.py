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
