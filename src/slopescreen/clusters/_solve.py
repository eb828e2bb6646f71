"""One checked entry point for every cvxpy solve of the clusters package.

cvxpy builds the problem (the modelling layer); HiGHS solves it in a child
process that is killed when it overruns its time limit
(:mod:`slopescreen.clusters._highs_process`); cvxpy maps the answer back to
the variables. :func:`solve_checked` turns every outcome into one of two
or an exception:

* ``"optimal"``: HiGHS proved optimality (within the gap options passed).
* ``"time_limit"``: only when a time limit was set, HiGHS stopped on it and
  holds a feasible point (always so when the solve is warm-started from a
  feasible point). The caller gets the point and HiGHS's dual bound and must
  report the answer as unproven. When HiGHS did not stop within the grace
  period the child is killed; the answer is then the warm-start point with
  no dual bound (``-inf``), also reported as ``"time_limit"``.

Anything else (infeasible, unbounded, solver error, ``optimal_inaccurate``,
a limit other than the time limit, a stop without a feasible point) raises
:class:`~slopescreen.errors.SolverError`: the callers only pose problems
that are feasible and bounded, so such a status is a fault, never an answer.
"""

import math
import warnings
import weakref
from types import SimpleNamespace
from typing import NamedTuple

import cvxpy as cp
import numpy as np

from ..errors import SolverError
from ._highs_process import solve_in_child

__all__ = ["SolveOutcome", "solve_checked"]

# HighsInfo.primal_solution_status: 2 = a feasible point is held
_FEASIBLE_POINT = 2

# HiGHS model status -> plain words for messages
_STATUS_WORDS = {"kInfeasible": "infeasible", "kUnbounded": "unbounded",
                 "kUnboundedOrInfeasible": "infeasible or unbounded",
                 "kTimeLimit": "time limit", "kIterationLimit": "iteration limit",
                 "kSolutionLimit": "solution limit", "kObjectiveBound": "objective bound",
                 "kObjectiveTarget": "objective target", "kModelError": "model error",
                 "kSolveError": "solve error", "kNotset": "not set", "kOptimal": "optimal"}

# the column vector of the last point held for each problem, the warm start of the next solve
_LAST_POINT = weakref.WeakKeyDictionary()


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
        Wall-clock limit handed to HiGHS, s (> 0); the process is killed
        when it has not answered by the limit plus
        :func:`~slopescreen.clusters._highs_process.grace_s`. Without it
        a stop on a limit is an error.
    warm_start : bool
        Hand the last point held for this problem object to HiGHS as a
        starting point (kept between solves of one problem; it must still
        be feasible, as when only the objective changed).
    **options
        Further HiGHS options (``mip_abs_gap``, ``mip_rel_gap``, ...).

    Returns
    -------
    SolveOutcome
        The variables of ``problem`` hold the point, as after
        ``problem.solve``.

    Raises
    ------
    SolverError
        Any status other than proven optimal, or a time-limit stop without
        a feasible point (a killed solve without a warm start among them);
        a non-finite objective; a maximisation; a solver process that
        cannot be started or ends unexpectedly.

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
    try:
        data, chain, inverse = problem.get_problem_data(cp.HIGHS)
    except cp.error.SolverError as exc:
        raise SolverError(f"HiGHS cannot take this problem: {exc}") from None
    start = _LAST_POINT.get(problem) if warm_start else None
    request = _request(data, opts, start)
    try:
        reply, wall = solve_in_child(request, time_limit_s)
    except RuntimeError as exc:
        raise SolverError(str(exc)) from None
    if reply is None:
        # killed after its time limit and the grace period: the answer is the start point
        if start is None:
            raise SolverError(f"HiGHS overran its time limit of {time_limit_s:g} s with no "
                              f"starting point to fall back on; the answer cannot be used")
        reply = _stopped_at(request, start, wall)
    status = reply["model_status"]
    info = SimpleNamespace(**reply["info"])
    if status == "kOptimal":
        outcome = "optimal"
    elif (status == "kTimeLimit" and time_limit_s is not None
          and int(info.primal_solution_status) == _FEASIBLE_POINT):
        outcome = "time_limit"
    else:
        word = _STATUS_WORDS.get(status, "unknown")
        raise SolverError(f"HiGHS returned status {word!r} ({status}; expected optimal, or a "
                          f"time-limit stop holding a feasible point); the answer cannot be used")
    results = {"solution": SimpleNamespace(col_value=reply["col_value"],
                                           row_dual=reply["row_dual"]),
               "info": info, "model_status": status, "run_time": reply["run_time"]}
    with warnings.catch_warnings():
        # a time-limit stop is reported as user_limit with a warning; it is
        # checked explicitly above instead
        warnings.filterwarnings("ignore", message="Solution may be inaccurate")
        problem.unpack_results(results, chain, inverse)
    _LAST_POINT[problem] = np.asarray(reply["col_value"], dtype=np.float64)
    value = problem.value
    if value is None or not math.isfinite(float(value)):
        raise SolverError(f"HiGHS returned a non-finite objective {value!r} with status {status}")
    value = float(value)
    dual = value
    if problem.is_mixed_integer():
        # cvxpy adds its constant offset to the value, not to HiGHS's bound
        offset = value - float(info.objective_function_value)
        dual = float(info.mip_dual_bound) + offset
        if not math.isfinite(dual):
            dual = -math.inf
    return SolveOutcome(outcome, value, dual, float(reply["run_time"]))


def _request(data, options, start):
    """The standard form HiGHS takes, from cvxpy's problem data (as cvxpy's own HiGHS interface)."""
    dims = data["dims"]
    if dims.exp or dims.soc or dims.psd or dims.p3d:
        raise SolverError("problem: only linear constraints can be passed to HiGHS")
    a = data["A"].tocsc()
    b = np.asarray(data["b"], dtype=np.float64)
    n_eq = int(dims.zero)
    lower = np.concatenate([b[:n_eq], np.full(b.size - n_eq, -np.inf)])
    n = a.shape[1]
    lb, ub = data["lower_bounds"], data["upper_bounds"]
    col_lower = np.full(n, -np.inf) if lb is None else np.array(lb, dtype=np.float64)
    col_upper = np.full(n, np.inf) if ub is None else np.array(ub, dtype=np.float64)
    boolean = np.asarray(data["bool_vars_idx"], dtype=np.int64)
    if boolean.size:
        col_lower[boolean] = np.maximum(col_lower[boolean], 0.0)
        col_upper[boolean] = np.minimum(col_upper[boolean], 1.0)
    integer = np.union1d(boolean, np.asarray(data["int_vars_idx"], dtype=np.int64))
    return {"c": np.asarray(data["c"], dtype=np.float64), "a_indptr": a.indptr,
            "a_indices": a.indices, "a_data": a.data, "shape": a.shape, "row_lower": lower,
            "row_upper": b, "col_lower": col_lower, "col_upper": col_upper,
            "integer_cols": integer, "options": options,
            "start": None if start is None else np.asarray(start, dtype=np.float64)}


def _stopped_at(request, start, wall):
    """The reply of a solve stopped by killing its process: the start point, no dual bound."""
    info = {"objective_function_value": float(request["c"] @ start),
            "mip_dual_bound": -math.inf, "mip_gap": math.inf, "mip_node_count": 0,
            "primal_solution_status": _FEASIBLE_POINT, "dual_solution_status": 0,
            "simplex_iteration_count": 0, "ipm_iteration_count": 0,
            "crossover_iteration_count": 0, "pdlp_iteration_count": 0,
            "qp_iteration_count": 0}
    return {"model_status": "kTimeLimit", "run_time": float(wall), "col_value": start,
            "row_dual": np.zeros(request["shape"][0]), "info": info}
