"""Fitting model stacks to measured spectra: thicknesses and indices from R or T.

- :func:`load_fit_model` / :func:`model_from_stack`: the model and its free parameters
  (:mod:`filmstack.fit.parameters` documents how a stack file marks them).
- :func:`fit_spectrum`: one sample; :func:`fit_map`: many sites, vectorised across sites.
- :class:`FitResult`, :class:`MapResult`, :func:`uniformity`: results.

Measured files are read by :func:`filmstack.io.measured.read_measured`.
"""

from .fitting import fit_map, fit_spectrum
from .parameters import (CauchyMaterial, FitModel, Parameter, ScaledIndexMaterial,
                         load_fit_model, model_from_stack, parse_fit_block)
from .results import FitResult, FitValue, MapResult, Uniformity, covariance, uniformity

__all__ = [
    "CauchyMaterial", "FitModel", "FitResult", "FitValue", "MapResult", "Parameter",
    "ScaledIndexMaterial", "Uniformity", "covariance", "fit_map", "fit_spectrum",
    "load_fit_model", "model_from_stack", "parse_fit_block", "uniformity",
]
