"""Validation of boundsvc on trained PINNs against closed-form solutions from the literature.

``python -m validation.run`` certifies cached networks (``validation/weights/*.npz``, trained by
:mod:`validation.train` with ``--retrain``) through a running service, compares every bound
with the true error computed from the exact solution, runs the sweeps and the tightening
analysis, and writes ``docs/validation.md`` with its plots. It exits non-zero if any bound is
below the true error.
"""
