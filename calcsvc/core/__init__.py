"""Framework-free calculation core: numpy arrays in, numpy arrays out.

Nothing here imports Flask, SQLAlchemy or any other part of calcsvc outside ``calcsvc.core``.
One row is simply an array of length one, so single requests and batches share one code path.
"""
