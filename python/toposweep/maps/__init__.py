"""Adaptive phase maps and gap closings.

``phase_map`` (``ts.phase_map``), ``adaptive_cells`` (which points to evaluate), ``weyl_bound``
(the band-shift bound that vouches for the others), ``phase_map_dataset`` (the map's extra
variables and file), ``transitions`` (closings along segments), ``transition_finder``
(``ts.find_transition``) and ``map_report`` (what a map adds to summaries and plots).

Uses ``results`` and the top-level sweep machinery (``sweep``, ``sweep_plan``,
``sweep_executor``, ``evaluation``, ...); ``plotting``, ``summary``, the command line and the
package's ``__init__`` use it.
"""
