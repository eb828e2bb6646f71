"""One checked entry point for every cvxpy solve of the clusters package (STYLE.md point 8).

cvxpy reports an infeasible or failed problem through ``problem.status`` and
leaves ``inf`` or ``None`` in the values; a MILP stopped by its time limit
comes back as ``user_limit`` with a warning. :func:`solve_checked` turns
every status into one of two outcomes or an exception:

* ``"optimal"``: HiGHS proved optimality (within the gap options passed).
* ``"time_limit"``: only when a time limit was set, HiGHS stopped on it and
  holds a feasible point (always so when the solve is warm-started from a
  feasible point). The caller gets the point and HiGHS's dual bound and must
  report the answer as unproven.

Anything else (infeasible, unbounded, solver error, ``optimal_inaccurate``,
a limit other than the time limit, a stop without a feasible point) raises
:class:`~slopescreen.errors.SolverError`: the callers only pose problems
that are feasible and bounded, so such a status is a fault, never an answer.
"""

import math
import warnings
from typing import NamedTuple

import cvxpy as cp

from ..errors import SolverError

__all__ = ["SolveOutcome", "solve_checked"]

# HighsInfo.primal_solution_status: 2 = a feasible point is held
_FEASIBLE_POINT = 2


class SolveOutcome(NamedTuple):
    """What :func:`solve_checked` returns."""

    status: str
    """"optimal" or "time_limit"."""
    value: float
    """Objective value of the point held (the incumbent for a MILP)."""
    dual_bound: float
    """Proven lower bound on the optimum (MILP: HiGHS's dual bound; LP: ``value``)."""
    seconds: float
    """Solver run time reported by HiGHS, s."""


def solve_checked(problem, *, time_limit_s=None, warm_start=False, **options):
    """Solve a cvxpy problem with HiGHS and check the outcome.

    Parameters
    ----------
    problem : cvxpy.Problem
        A linear or mixed-integer linear minimisation.
    time_limit_s : float, optional
        Wall-clock limit handed to HiGHS, s (> 0). Without it a stop on a
        limit is an error.
    warm_start : bool
        Hand the previous solution of this problem object to HiGHS as a
        starting point (cvxpy keeps it between solves of one problem).
    **options
        Further HiGHS options (``mip_abs_gap``, ``mip_rel_gap``, ...).

    Returns
    -------
    SolveOutcome

    Raises
    ------
    SolverError
        Any status other than proven optimal, or a time-limit stop without
        a feasible point; a non-finite objective; a maximisation.

    Notes
    -----
    HiGHS's ``optimal`` for a MILP means the relative and absolute gaps
    between incumbent and dual bound are within ``mip_rel_gap`` and
    ``mip_abs_gap``; the dual bound is returned so that callers can state
    the proven bound themselves rather than trust the gap options.

    References
    ----------
    Huangfu, Q., Hall, J.A.J. (2018). Parallelizing the dual revised simplex
    method. Mathematical Programming Computation 10, 119-142.
    doi 10.1007/s12532-017-0130-5

    Examples
    --------
    >>> import cvxpy as cp
    >>> x = cp.Variable(2, boolean=True)
    >>> out = solve_checked(cp.Problem(cp.Minimize(x[0] - 2 * x[1]), [cp.sum(x) <= 1]))
    >>> out.status, out.value
    ('optimal', -2.0)
    """
    if not isinstance(problem.objective, cp.Minimize):
        raise SolverError("problem: solve_checked takes minimisations only (the dual bound "
                          "it reports is a lower bound)")
    opts = {"random_seed": 0, "log_to_console": False, "output_flag": False}
    opts.update(options)
    if time_limit_s is not None:
        if not (isinstance(time_limit_s, (int, float)) and time_limit_s > 0):
            raise SolverError(f"time_limit_s: expected a positive number, got {time_limit_s!r}")
        opts["time_limit"] = float(time_limit_s)
    with warnings.catch_warnings():
        # a time-limit stop is reported as user_limit with a warning; it is
        # checked explicitly below instead
        warnings.filterwarnings("ignore", message="Solution may be inaccurate")
        try:
            problem.solve(solver=cp.HIGHS, warm_start=warm_start, **opts)
        except cp.error.SolverError as exc:
            raise SolverError(f"HiGHS failed: {exc}") from None
    status = problem.status
    stats = problem.solver_stats
    info = stats.extra_stats if stats is not None else None
    seconds = float(stats.solve_time) if stats is not None and stats.solve_time else 0.0
    value = problem.value
    if status == cp.OPTIMAL:
        outcome = "optimal"
    elif (status == cp.USER_LIMIT and time_limit_s is not None and info is not None
          and int(info.primal_solution_status) == _FEASIBLE_POINT
          and seconds >= 0.9 * float(time_limit_s)):
        outcome = "time_limit"
    else:
        raise SolverError(f"HiGHS returned status {status!r} (expected optimal, or a time-limit "
                          f"stop holding a feasible point); the answer cannot be used")
    if value is None or not math.isfinite(float(value)):
        raise SolverError(f"HiGHS returned a non-finite objective {value!r} with status {status}")
    value = float(value)
    dual = value
    if info is not None and problem.is_mixed_integer():
        # cvxpy adds its constant offset to the value, not to HiGHS's bound
        offset = value - float(info.objective_function_value)
        dual = float(info.mip_dual_bound) + offset
        if not math.isfinite(dual):
            dual = -math.inf
    return SolveOutcome(outcome, value, dual, seconds)
