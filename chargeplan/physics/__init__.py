"""Numerical kernels: plain floats and numpy arrays, units in the names (``_v``, ``_c``)."""
