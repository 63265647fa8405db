"""File formats: cube volumetric data, XYZ geometries, scan manifests.

Each format lives in its own module with ``read_<fmt>`` / ``write_<fmt>``;
units are converted to bohr at this boundary.
"""
