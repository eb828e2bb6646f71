"""HiGHS in a child process that can be stopped: the hard time limit of every MILP solve.

HiGHS watches its ``time_limit`` option between phases, not inside all of
them. Measured on a 40 x 30 window where nearly every cell fails (a steep
wet plane): one solve with a 3 s limit ran 34 s, all of it in the cut
separation rounds of the root node after the first LP (HiGHS 1.16; no
option stops those rounds; turning presolve off cut it to 8 s and doubled
the typical solve). A limit the user sets must hold, so every solve of the
clusters package runs here, in one long-lived child process: the parent
waits at most the limit plus a grace period and kills the child when it
has not answered (a new child is started for the next solve).

The child is this file run as a script (``python -P _highs_process.py FOLDER...``,
the folders the parent found numpy and highspy in):
it imports only the standard library, numpy and highspy, never the
package, so it starts in a fraction of a second and cannot re-run a
user's script (the trap of multiprocessing's spawn). Requests and replies
are pickles over its stdin and stdout; the child moves its own standard
output to the null device first, so HiGHS's banner never reaches the
user's terminal.

The problem is passed as plain arrays (the standard form HiGHS takes)::

    minimise  c x   s.t.  row_lower <= A x <= row_upper,
                          col_lower <= x <= col_upper,  x_j integer for j in integer_cols
"""

import atexit
import logging
import os
import pickle
import queue
import subprocess
import sys
import threading
import time

__all__ = ["GRACE_S", "HighsProcess", "grace_s", "solve_in_child"]

log = logging.getLogger("slopescreen.clusters")

GRACE_S = 1.0
"""Fixed part of the grace period after a time limit, s (see :func:`grace_s`)."""

_INFO_FIELDS = ("objective_function_value", "mip_dual_bound", "mip_gap", "mip_node_count",
                "primal_solution_status", "dual_solution_status", "simplex_iteration_count",
                "ipm_iteration_count", "crossover_iteration_count", "pdlp_iteration_count",
                "qp_iteration_count")


def grace_s(time_limit_s):
    """How long past its time limit a solve may run before the child is killed, s.

    ``GRACE_S`` plus a tenth of the limit: HiGHS stops within a fraction of
    a second of its limit whenever it looks at the clock, so a solve still
    running after this is inside a phase that does not look.

    Examples
    --------
    >>> grace_s(10.0)
    2.0
    """
    return GRACE_S + 0.1 * float(time_limit_s)


class HighsProcess:
    """One child process serving HiGHS solves, started on first use, restarted after a kill."""

    def __init__(self):
        self._proc = None
        self._lock = threading.Lock()
        self.kills = 0
        """How many solves were stopped by killing the child (for tests and logs)."""

    def _start(self):
        cmd = [sys.executable, "-P", os.path.abspath(__file__), *_package_folders()]
        self._proc = subprocess.Popen(cmd, stdin=subprocess.PIPE, stdout=subprocess.PIPE)

    def _stop(self, kill=False):
        proc, self._proc = self._proc, None
        if proc is None:
            return
        try:
            if kill:
                proc.kill()
            else:
                proc.stdin.close()
            proc.wait(timeout=5.0)
        except (OSError, subprocess.TimeoutExpired):
            proc.kill()
            proc.wait()
        finally:
            for stream in (proc.stdin, proc.stdout):
                try:
                    stream.close()
                except OSError:
                    pass

    def close(self):
        """End the child (it also ends when the parent exits)."""
        with self._lock:
            self._stop()

    def solve(self, request, wait_s=None):
        """Send one request and wait for the reply.

        Parameters
        ----------
        request : dict
            The problem (see :func:`_solve_request` for the keys).
        wait_s : float, optional
            Longest wait for the reply, s; ``None`` waits as long as it takes.

        Returns
        -------
        dict or None
            The reply, or ``None`` when the child was killed after ``wait_s``.

        Raises
        ------
        RuntimeError
            The child could not be started, ended unexpectedly or reported an
            exception (its text is in the message).
        """
        with self._lock:
            if not sys.executable:
                raise RuntimeError("no Python executable is known (sys.executable is empty), "
                                   "so the solver process cannot be started")
            if self._proc is None or self._proc.poll() is not None:
                self._stop()
                self._start()
            proc = self._proc
            replies = queue.Queue(maxsize=1)

            def read():
                try:
                    replies.put(pickle.load(proc.stdout))
                except Exception as exc:  # EOF after a kill, or a broken pipe
                    replies.put(exc)

            reader = threading.Thread(target=read, daemon=True)
            reader.start()
            try:
                pickle.dump(request, proc.stdin, protocol=pickle.HIGHEST_PROTOCOL)
                proc.stdin.flush()
            except OSError as exc:
                self._stop(kill=True)
                raise RuntimeError(f"the solver process ended unexpectedly ({exc})") from None
            try:
                reply = replies.get(timeout=wait_s)
            except queue.Empty:
                self.kills += 1
                log.info("HiGHS had not answered %.1f s after its request; solver process "
                         "stopped (the answer is the best set held before this solve)", wait_s)
                self._stop(kill=True)
                reader.join()
                return None
            except BaseException:  # Ctrl-C while waiting: the solve must not go on alone
                self._stop(kill=True)
                raise
            if isinstance(reply, BaseException):
                code = proc.poll()
                self._stop(kill=True)
                raise RuntimeError(f"the solver process ended unexpectedly (exit code {code}, "
                                   f"{type(reply).__name__})")
            if "error" in reply:
                raise RuntimeError(reply["error"])
            return reply


def _package_folders():
    """Folders the parent found numpy and highspy in, for the child to append to its path.

    The child must import the same numpy and highspy as the parent even when the parent
    found them on a path it added itself (a notebook's sys.path, a --target install).
    Appended, never prepended, so that nothing there can shadow the standard library.
    """
    import importlib.util

    folders = []
    for name in ("numpy", "highspy"):
        spec = importlib.util.find_spec(name)
        if spec is not None and spec.origin:
            folder = os.path.dirname(os.path.dirname(os.path.abspath(spec.origin)))
            if folder not in folders:
                folders.append(folder)
    return folders


_PROCESS = HighsProcess()
atexit.register(_PROCESS.close)


def solve_in_child(request, time_limit_s=None):
    """Solve one problem in the shared child process, killing it past the time limit.

    Parameters
    ----------
    request : dict
        Keys ``c``, ``a_indptr``, ``a_indices``, ``a_data``, ``shape``,
        ``row_lower``, ``row_upper``, ``col_lower``, ``col_upper``,
        ``integer_cols``, ``options`` (HiGHS option name -> value) and
        ``start`` (a column vector handed to HiGHS as a starting point, or
        ``None``).
    time_limit_s : float, optional
        HiGHS's time limit (already in ``options``); the wait is this plus
        :func:`grace_s`.

    Returns
    -------
    (dict or None, float)
        The reply (``model_status``, ``run_time``, ``col_value``,
        ``row_dual``, ``info``) or ``None`` when the child was killed, and
        the wall time, s.
    """
    wait = None if time_limit_s is None else float(time_limit_s) + grace_s(time_limit_s)
    t0 = time.perf_counter()
    reply = _PROCESS.solve(request, wait)
    return reply, time.perf_counter() - t0


# --------------------------------------------------------------------- the child's side


def _solve_request(request):
    import numpy as np
    import highspy

    h = highspy.Highs()
    for name, value in request["options"].items():
        if h.setOptionValue(name, value) == highspy.HighsStatus.kError:
            raise ValueError(f"HiGHS refused option {name} = {value!r}")
    inf = highspy.kHighsInf
    lp = highspy.HighsLp()
    rows, cols = request["shape"]
    lp.num_col_ = int(cols)
    lp.num_row_ = int(rows)
    lp.col_cost_ = np.asarray(request["c"], dtype=np.float64)
    lp.col_lower_ = np.where(np.isfinite(request["col_lower"]), request["col_lower"], -inf)
    lp.col_upper_ = np.where(np.isfinite(request["col_upper"]), request["col_upper"], inf)
    lp.row_lower_ = np.where(np.isfinite(request["row_lower"]), request["row_lower"], -inf)
    lp.row_upper_ = np.where(np.isfinite(request["row_upper"]), request["row_upper"], inf)
    lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    lp.a_matrix_.start_ = np.asarray(request["a_indptr"], dtype=np.int32)
    lp.a_matrix_.index_ = np.asarray(request["a_indices"], dtype=np.int32)
    lp.a_matrix_.value_ = np.asarray(request["a_data"], dtype=np.float64)
    integer = np.asarray(request["integer_cols"], dtype=np.int64)
    if integer.size:
        kinds = [highspy.HighsVarType.kContinuous] * int(cols)
        for j in integer:
            kinds[int(j)] = highspy.HighsVarType.kInteger
        lp.integrality_ = kinds
    status = h.passModel(lp)
    if status == highspy.HighsStatus.kError:
        raise ValueError("HiGHS refused the model")
    if request.get("start") is not None:
        sol = highspy.HighsSolution()
        sol.col_value = np.asarray(request["start"], dtype=np.float64)
        sol.value_valid = True
        h.setSolution(sol)
    h.run()
    solution = h.getSolution()
    info = h.getInfo()
    return {
        "model_status": h.getModelStatus().name,
        "run_time": float(h.getRunTime()),
        "col_value": np.asarray(solution.col_value, dtype=np.float64),
        "row_dual": np.asarray(solution.row_dual, dtype=np.float64),
        "info": {k: getattr(info, k) for k in _INFO_FIELDS},
    }


def _serve():
    """Answer requests from stdin on a private copy of stdout until stdin closes."""
    for folder in sys.argv[1:]:
        if folder not in sys.path:
            sys.path.append(folder)
    out = os.fdopen(os.dup(1), "wb")
    null = os.open(os.devnull, os.O_WRONLY)
    os.dup2(null, 1)  # HiGHS prints its banner on the C stdout
    sys.stdout = open(os.devnull, "w")
    inp = sys.stdin.buffer
    while True:
        try:
            request = pickle.load(inp)
        except EOFError:
            return
        try:
            reply = _solve_request(request)
        except Exception as exc:  # reported to the parent, which raises it as a solver error
            reply = {"error": f"HiGHS: {type(exc).__name__}: {exc}"}
        pickle.dump(reply, out, protocol=pickle.HIGHEST_PROTOCOL)
        out.flush()


if __name__ == "__main__":
    _serve()
