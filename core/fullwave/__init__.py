"""Full-wave (NEC-2, method of moments) models of the wheel and the whole vehicle.

- :mod:`core.fullwave.nec_models`: wire-grid builders (plate, rim, steel belt, wheel), the analytic
  short-dipole field, and :class:`~core.fullwave.nec_models.NecSolver`, the wrapper around NEC-2
  (the PyNEC package);
- :mod:`core.fullwave.nec_checks`: harnesses comparing the engine's simple models with NEC-2;
- :mod:`core.fullwave.edge_reference`: the exact (UTD) conducting half-plane per polarization.

PyNEC is imported only inside the functions that run the solver, so every module here imports with
numpy (and scipy) alone; PyNEC comes with the ``fullwave`` extra (``pip install 'wheelreach[fullwave]'``).
"""
