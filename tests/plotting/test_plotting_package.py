"""Library figures use matplotlib's object API only: importing and drawing never loads pyplot or picks a backend."""
import subprocess
import sys

SCRIPT = """
import sys
import numpy as np
import xarray as xr
import synthcorona.io.report, synthcorona.io.writers
import synthcorona.plotting.cycle, synthcorona.plotting.dimming, synthcorona.plotting.forecast
import synthcorona.plotting.instruments, synthcorona.plotting.spectrum
import synthcorona.cli.cycle, synthcorona.cli.emission, synthcorona.cli.forecast, synthcorona.cli.spectrum
w = np.arange(10.0, 20.0)
spec = xr.DataArray(np.ones(10), coords={"wavelength": w}, dims="wavelength", attrs={"units": "1"})
synthcorona.io.writers.figure_png(synthcorona.plotting.spectrum.plot_spectrum(spec))
assert "matplotlib.pyplot" not in sys.modules, "pyplot was imported"
print("ok")
"""


def test_no_pyplot_in_library_code():
    env = {"PATH": "/usr/bin:/bin"}                 # no MPLBACKEND: the library must not need one
    out = subprocess.run([sys.executable, "-c", SCRIPT], capture_output=True, text=True, timeout=300, env=env)
    assert out.returncode == 0, out.stderr[-2000:]
    assert out.stdout.strip() == "ok"
