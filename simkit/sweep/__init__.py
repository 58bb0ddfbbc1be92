"""Many designs at once: sweeps, Monte Carlo spreads and sizing, on local workers or a Dask cluster.

- :mod:`~simkit.sweep.specs`: ``--vary PATH=SPEC`` (lists, linear and log ranges), grids and pairs,
  each point a design made the way ``--set`` makes one, or an error row.
- :mod:`~simkit.sweep.runner`: :func:`~simkit.sweep.runner.run_sweep` and the shared
  :func:`~simkit.sweep.runner.execute`: journal, resume, progress, ``<kind>.csv``/``<kind>.json``.
- :mod:`~simkit.sweep.journal`: the append-only, fsync-ed record that makes a run resumable.
- :mod:`~simkit.sweep.pool`: spawned worker processes, one ngspice each, replaced when they die.
- :mod:`~simkit.sweep.cluster`: the same points on a Dask distributed cluster.
- :mod:`~simkit.sweep.worker`: what a worker does with one point.
- :mod:`~simkit.sweep.spread`: draws within the design file's tolerances, percentiles, extremes.
- :mod:`~simkit.sweep.size`: bracketed root finding of one value for a target figure.

Nothing is imported here, so a worker process loads only what it uses.
"""
