"""Test configuration: one BLAS thread per process (see wavefit/blas_threads.py), set before numpy loads."""
import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")
