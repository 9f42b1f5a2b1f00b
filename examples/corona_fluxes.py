"""Band fluxes, a spectrum and Λ(T) for the corona of an invented star.

Scenario (invented): Verdane-2, an active K1 dwarf 8.4 pc away, whose corona is described
by a two-temperature fit (3 MK and 10 MK components) with coronal abundances and an
inverse-FIP variant, as if from a survey proposal. Run:  python examples/corona_fluxes.py
"""
import astropy.units as u
import numpy as np

import synthcorona as sc

table = sc.load_emissivity()
corona = sc.MultiComponentDEM.from_temperatures(temperatures=[3e6, 1e7] * u.K, ems=[2e51, 8e50] * u.cm ** -3)
distance = 8.4 * u.pc
bands = {"0.1-2.4 keV": (0.1, 2.4) * u.keV, "2-10 keV": (2, 10) * u.keV, "EUV 60-400 A": (60, 400) * u.AA}
for label, abund in (("coronal", "coronal"), ("inverse FIP x0.3", sc.fip_bias("coronal", 0.3))):
    fluxes = sc.band_flux(corona, band=bands, distance=distance, table=table, abundances=abund)
    print(label + ":", ", ".join(f"{k} {v:.3e}" for k, v in zip(bands, fluxes)))
spec = sc.synthesize(corona, wavelength=np.arange(5, 40, 0.01) * u.AA, table=table, distance=distance,
                     thermal_broadening=True)
i = int(np.argmax(spec.values))
print(f"brightest 5-40 A bin: {float(spec.wavelength[i]):.2f} A, {spec.values[i]:.3e} {spec.attrs['units']}")
lam = sc.radiative_loss(np.logspace(5, 8, 7) * u.K, table=table)
print("radiative loss (coronal, 1e10 cm-3):", np.array2string(lam.value, precision=2), lam.unit)
