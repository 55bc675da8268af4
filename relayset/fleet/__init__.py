"""Fleet runs: many studies computed in parallel, a register of results, nothing lost.

``jobs`` finds the studies (a folder or a line register), ``worker`` computes one line and
returns its output bytes, ``batch`` runs them on a local process pool or a Dask cluster
(``cluster``) and writes every output atomically, ``register`` writes the register of
results (CSV, .xlsx, HTML index; user text visible and never a spreadsheet formula),
``lock`` keeps a second batch out of an output folder in use, ``progress`` shows progress on
stderr.
"""
