"""Hostile-input fuzzing and repeated-kill checks (strategies in ``strategies.py``)."""
