"""Differential emission measure (DEM) models, vectorised over batches of DEMs.

Conventions
-----------
* The emission measure is ``EM = integral n_e n_H dV`` (volume EM, cm^-3) or
  ``integral n_e n_H dh`` (column EM, cm^-5). Every model carries the unit the
  user gave (converted to exactly ``cm-3`` or ``cm-5``) through to its outputs.
* ``DEM(T) = dEM/dT`` in ``em_unit / K`` (per kelvin). The density per unit
  log10 T is ``dEM/dlog10T = ln(10) T DEM(T)``.
* Parameters may be numpy arrays; all parameters of a model broadcast together
  to the model's ``batch_shape``, so one object holds many DEMs (e.g. 10,000
  Gaussian DEMs from a sampler) and every method is vectorised over the batch.

Emission-measure weights on a log T grid
----------------------------------------
:meth:`DEM.em_weights` gives, for a strictly increasing grid ``x_i = log10 T_i``,
weights ``w_i`` (in ``em_unit``) such that ``sum_i w_i K(T_i)`` approximates
``integral DEM(T) K(T) dT`` for a kernel ``K`` known only on the grid
(emissivities). The rule is the same for every model:

    w_i = integral f(x) phi_i(x) dx,

where ``f = dEM/dlog10T`` and ``phi_i`` are the piecewise-linear "hat" functions
of the grid (1 at ``x_i``, 0 at the neighbouring nodes). Hence ``sum_i w_i K_i``
is the **exact** integral of the DEM against the kernel interpolated linearly in
log T between nodes. Consequences:

* an isothermal component puts its EM on the two neighbouring nodes with
  weights linear in log T (exactly one node if its temperature is on a node,
  to within 1e-6 of the cell width);
* ``sum_i w_i`` equals the EM inside the grid exactly, and the first moment in
  log T is preserved exactly (``sum w_i x_i = integral f x dx``);
* for a smooth DEM it agrees with the trapezoid rule in log T (DEM per log T
  at the nodes times the step, half weight at the end nodes) to second order in
  the step, but it stays exact for kernels linear in log T when the DEM is
  narrower than a grid cell or has a sharp cut-off between nodes (the trapezoid
  rule misplaces such EM by up to half a cell).

The integrals are done in closed form for each model (normal CDF for the
Gaussian, exponentials in log T for power laws and tabulated DEMs). A
continuous DEM with more than 1e-6 of its (non-zero) total EM outside the grid
raises :class:`~synthcorona.errors.InputError`: EM is never dropped silently.
"""
from __future__ import annotations

from ..constants import DEFAULT_LOGT_GRID
from .base import DEM
from .models import GaussianDEM, IsothermalDEM, MultiComponentDEM, PowerLawDEM
from .tabulated import TabulatedDEM

__all__ = [
    "DEFAULT_LOGT_GRID",
    "DEM",
    "IsothermalDEM",
    "GaussianDEM",
    "MultiComponentDEM",
    "PowerLawDEM",
    "TabulatedDEM",
]
