"""matdb: a cited database of diamagnetic materials and permanent-magnet grades,
levitation physics over analytic magnet fields, and a selection advisor.

SI units inside; :mod:`matdb.units` parses and prints quantities at the boundary.
"""

__version__ = "0.1.0"
