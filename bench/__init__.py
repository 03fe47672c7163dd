"""Performance benchmarks of boundsvc (``make bench`` runs :mod:`bench.run_all`).

Not part of ``make test``: every figure depends on the machine and its load. See
docs/benchmarks.md for one run's tables and their reading.
"""

import os as _os

# before numpy is imported anywhere: idle OpenBLAS helper threads spin (docs: perf notes)
_os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
