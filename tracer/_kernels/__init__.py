"""numba kernels. They import numpy, numba and :mod:`tracer.config` only, and see arrays and scalars."""
