"""Numba point kernels shared by more than one package (private; import each module directly)."""
