"""One place for numba options.

Every kernel in the package is compiled with :data:`njit` (``cache=True``,
never ``fastmath``, which silently treats NaN as a number) or
:data:`njit_parallel` for row-parallel loops. Set ``NUMBA_DISABLE_JIT=1`` to
run the kernels as plain Python, for coverage or debugging.
"""

import numba

njit = numba.njit(cache=True, nogil=True)
"""Decorator for serial kernels."""

njit_parallel = numba.njit(cache=True, nogil=True, parallel=True)
"""Decorator for kernels whose outer loop is a ``numba.prange`` over rows."""

prange = numba.prange
