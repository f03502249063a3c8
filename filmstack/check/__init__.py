"""The check job: is a quoted stack compliant with a spec, how sensitive, how many runs pass?

- :func:`check_stack` — every requirement with value, limit, signed margin and verdict (on the
  spec's grid and a 4× finer one), the spec's limits, notes;
- :func:`sensitivities` — ∂value/∂thickness of every requirement for every layer, ranked;
- :func:`monte_carlo` — production yield under random thickness, systematic rate and index
  errors, with an exact binomial confidence interval;
- :func:`compare_stacks` — spectral and colour differences of two stacks.

Python use::

    from filmstack.io.stack_file import load_stack
    from filmstack.spec import load_spec
    from filmstack.check import check_stack, monte_carlo

    stack, spec = load_stack("quote.yaml"), load_spec("spec.yaml")
    verdict = check_stack(stack, spec)
    mc = monte_carlo(stack, spec, trials=2000, seed=1)
    print(verdict.passed, mc.yield_, mc.ci)
"""

from .compare import CompareResult, compare_stacks
from .compliance import CheckResult, LimitResult, check_limits, check_stack
from .montecarlo import RequirementYield, YieldResult, draw_trials, monte_carlo
from .sensitivity import Sensitivity, sensitivities
from .stats import clopper_pearson, wilson

__all__ = ["CheckResult", "CompareResult", "LimitResult", "RequirementYield", "Sensitivity",
           "YieldResult", "check_limits", "check_stack", "clopper_pearson", "compare_stacks",
           "draw_trials", "monte_carlo", "sensitivities", "wilson"]
