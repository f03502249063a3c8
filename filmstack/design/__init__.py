"""Design from a spec: merit function, refinement, needle synthesis and gradual evolution.

Public names::

    from filmstack.design import synthesize, DesignResult, Merit, Design, DesignProblem
    from filmstack.design import refine, refine_thicknesses, needle_function

Typical use::

    from filmstack.spec import load_spec
    from filmstack.design import synthesize
    result = synthesize(load_spec("examples/design-visible-ar.yaml"), seed=1, time_limit_s=30)
    result.stack, result.merit, result.success, result.history

Heavy modules (scipy.optimize) are imported only when an optimisation runs.
"""

from .layout import DEFAULT_THINNEST_NM, Design, DesignProblem
from .merit import Merit
from .needle import NeedleScan, gradual_evolution, insert_needle, needle_function, needle_optimise
from .refine import Clock, TimeUp, refine, refine_thicknesses
from .synthesis import DesignResult, start_design, synthesize

__all__ = ["Clock", "DEFAULT_THINNEST_NM", "Design", "DesignProblem", "DesignResult", "Merit",
           "NeedleScan", "TimeUp", "gradual_evolution", "insert_needle", "needle_function",
           "needle_optimise", "refine", "refine_thicknesses", "start_design", "synthesize"]
