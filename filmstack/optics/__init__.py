"""The optics engine: pure array functions (no files, names or units other than nm and degrees).

Shape convention: wavelength on the last axis (W,), angle before it (A,), layers before that
(L,), and any leading batch dimensions in front, broadcast together: indices (..., L, W),
thicknesses (..., L), results (..., A, W), per-layer derivatives (..., L, A, W).
"""

from .coherent import (CoherentDerivatives, CoherentResponse, StackVectors, coherent_derivatives,
                       coherent_response, stack_vectors)

__all__ = ["CoherentDerivatives", "CoherentResponse", "StackVectors", "coherent_derivatives",
           "coherent_response", "stack_vectors"]
