"""Portable C99 reference of the linedrop algorithm and its cffi binding (see binding.py)."""
