"""filmstack: design and verify thin-film interference coatings.

Public names (``import filmstack``): the data model (:class:`Stack`, :class:`Layer`), materials
(:func:`get_material`, :func:`list_materials`), stack files (:func:`load_stack`,
:func:`save_stack`), the stack response (:func:`spectrum`) and the errors.
"""

from .errors import ExtrapolationWarning, FilmstackError, InputError, OutOfRangeError
from .materials import Constant, Material, get_material, list_materials, material_from_spec
from .stack import AIR, FreeParameter, Layer, Stack, nm_to_qwot, qwot_to_nm
from .io.stack_file import load_stack, save_stack
from .notation import format_notation, parse_notation
from .response import (FieldProfile, PhaseResponse, Spectrum, SpectrumDerivatives, field_profile,
                       phase_response, spectrum, spectrum_derivatives)

__version__ = "0.1.0"

__all__ = [
    "AIR", "Constant", "ExtrapolationWarning", "FilmstackError", "FreeParameter", "InputError",
    "Layer", "Material", "OutOfRangeError", "Stack", "get_material", "list_materials",
    "material_from_spec", "nm_to_qwot", "qwot_to_nm",
    "FieldProfile", "PhaseResponse", "Spectrum", "SpectrumDerivatives", "field_profile",
    "phase_response", "spectrum", "spectrum_derivatives", "load_stack", "save_stack",
    "format_notation", "parse_notation",
]
