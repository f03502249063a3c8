"""Colorimetry of coatings and films, colour requirements, and thickness from colour.

- :mod:`~filmstack.colour.colorimetry`: pure CIE colorimetry on arrays (spectra -> XYZ by
  precomputed tristimulus weights; xyY, CIELAB, LCh, sRGB with a gamut flag; ΔE2000).
- :mod:`~filmstack.colour.stack_colour`: reflected/transmitted colour of a Stack over angles,
  ΔE2000 between two stacks.
- :mod:`~filmstack.colour.requirements`: colour requirements of a spec (a*/b* box, ΔE2000 to a
  target) evaluated on a stack or a batch of designs.
- :mod:`~filmstack.colour.thickness`: film thickness candidates from an observed colour.

Heavy libraries (colour-science, the engine) are imported inside the functions that need them.
"""

from .colorimetry import (COLOUR_WAVELENGTHS_NM, ILLUMINANTS, OBSERVERS, Lab_to_LCh, XYZ_to_Lab,
                          XYZ_to_srgb, XYZ_to_xyY, delta_e_2000, spectra_to_XYZ,
                          tristimulus_weights, white_point_XYZ)
from .requirements import (colour_requirement, colour_values, evaluate_colour_requirement,
                           validate_options)
from .stack_colour import ColourSetting, StackColour, delta_e_stacks, stack_colour
from .thickness import (CAUTION, FilmSystem, Observation, ThicknessResult, film_colour_table,
                        find_thickness, observation_from_photo)

__all__ = [
    "CAUTION", "COLOUR_WAVELENGTHS_NM", "ColourSetting", "FilmSystem", "ILLUMINANTS",
    "Lab_to_LCh", "OBSERVERS", "Observation", "StackColour", "ThicknessResult", "XYZ_to_Lab",
    "XYZ_to_srgb", "XYZ_to_xyY", "colour_requirement", "colour_values", "delta_e_2000",
    "delta_e_stacks", "evaluate_colour_requirement", "film_colour_table", "find_thickness",
    "observation_from_photo", "spectra_to_XYZ", "stack_colour", "tristimulus_weights",
    "validate_options", "white_point_XYZ",
]
