"""Bendline's application shell: command line, dashboard, run stores, executors.

Modules here import nothing heavy at import time (workers import them too);
the Dash app is built by :func:`app.web.create_app`.
"""

import os as _os

# One BLAS thread per process, unless the user set otherwise. The sampler's
# matrix products are small; on the reference problem extra OpenBLAS threads
# added CPU time (user 3.2-3.4 s for 2.6-3.1 s wall) without making the fit
# faster, and took the second core from the web server, the browser and a
# second fit. Set here, before anything imports numpy, so worker processes
# (spawned or forked from this one) inherit it.
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    _os.environ.setdefault(_name, "1")
del _name
