"""Results: the Dataset schema and the result file.

The schema of a result Dataset and how it is built (``dataset``, ``dataset_methods``,
``dataset_assembly``), and the crash-safe result file with its journal (``store``).

Uses the top-level modules ``errors``, ``model``, ``sampling``, ``file_digest`` and
``_version``, and no other subpackage; ``sweep``, ``api``, ``maps`` and the command line use it.
(``file_digest`` stays at the top: ``python -m toposweep.file_digest`` checks a file by hand.)
"""
