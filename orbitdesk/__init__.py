"""OrbitDesk: a workbench for hand-built dynamical models."""

import os as _os

__version__ = "0.1.0"

# The matrices the analyses factorise are small (a few hundred rows at most): one BLAS thread does them
# faster than several threads waiting for each other on a busy machine (a 100 x 100 solve measured here:
# 0.1 ms alone, 141 ms with OpenBLAS's own threads at load 20). A value the user set stands. It takes
# effect because the package is imported before numpy by the app, the command line and the tests.
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    _os.environ.setdefault(_name, "1")
