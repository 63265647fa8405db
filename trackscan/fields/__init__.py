"""Fields that implement :class:`trackscan.field.Field`.

- :class:`GridField`: tricubic B-spline interpolation of a DensityGrid, with
  the core-localised promolecule subtracted and added back analytically;
- :class:`LocalizedPromolecule`: free atoms switched off beyond a radius;
- :class:`SphericalSum`: analytic sums of spherical Gaussians or Slaters.
"""

from trackscan.fields.analytic import SphericalSum
from trackscan.fields.bspline import TricubicBSpline
from trackscan.fields.grid_field import GridField
from trackscan.fields.localized import LocalizedPromolecule

__all__ = ["GridField", "LocalizedPromolecule", "SphericalSum", "TricubicBSpline"]
