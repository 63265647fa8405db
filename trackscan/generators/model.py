"""Generator of cubes from the built-in promolecular model (no QC code needed)."""

from __future__ import annotations

import logging
from pathlib import Path

from trackscan.generators.base import GeneratedFrame, Generator, check_grid_size, sibling
from trackscan.io.generator_config import PromoleculeConfig
from trackscan.io.cube import write_cube
from trackscan.promolecule import MODEL_LABEL, promolecule_grid

__all__ = ["PromoleculeGenerator"]

logger = logging.getLogger(__name__)


class PromoleculeGenerator(Generator):
    """Cubes of the Clementi–Raimondi promolecule at each geometry.

    Parameters
    ----------
    drive : CoordinateDrive or TrajectoryDrive
    options : PromoleculeConfig
        Grid spacing and box margin (bohr).

    Notes
    -----
    The result is a model density (a sum of free spherical atoms), not a
    quantum-chemical one; :meth:`describe` and the cube's first comment
    line say so.
    """

    def __init__(self, drive, options: PromoleculeConfig = PromoleculeConfig()):
        if drive is None:
            raise ValueError("the promolecular model needs a geometry drive")
        super().__init__(drive)
        self.options = options

    def describe(self) -> str:
        return f"{MODEL_LABEL}, cube spacing {self.options.spacing:g} bohr"

    def generate(self, value: float, cube_path, workdir=None) -> GeneratedFrame:
        cube_path = Path(cube_path)
        geom = self.geometry(value)
        check_grid_size(geom.positions, spacing=self.options.spacing, margin=self.options.margin,
                        value=value, path=cube_path)
        grid = promolecule_grid(geom.numbers, geom.positions, spacing=self.options.spacing,
                                margin=self.options.margin, source=str(cube_path))
        xyz = sibling(cube_path, ".xyz")
        self.write_geometry(value, xyz)
        write_cube(cube_path, grid, comments=(MODEL_LABEL, f"trackscan value={value!r}"))
        logger.info("promolecule cube at %g: %s (%d points)", value, cube_path, grid.values.size)
        return GeneratedFrame(cube_path, float(value), None, False, xyz)
