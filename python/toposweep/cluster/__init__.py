"""Independent tasks run by other processes or machines.

``executors`` (``ChunkRunner`` over a Dask client or any ``concurrent.futures.Executor``),
``executor_worker`` (what a task runs) and ``executor_backends`` (where tasks run).

Knows nothing of sweeps (``sweep_executor``, at the top, makes a sweep's chunks into tasks) and
uses only ``errors``.
"""
