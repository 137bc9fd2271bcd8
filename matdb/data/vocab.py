"""The words the database's text columns take (quality classes, magnet families, ...).

Plain tuples, apart from :mod:`matdb.data.models` so that lookups and input checks need not
import the ORM models (start-up of the command line); ``models`` re-exports them.
"""

QUALITY_CLASSES = ("handbook", "standard", "measured", "estimate")
MATERIAL_KINDS = ("diamagnetic", "paramagnetic")
FAMILIES = ("NdFeB", "SmCo", "ferrite", "AlNiCo", "bonded-NdFeB")
SOURCE_KINDS = ("handbook", "standard", "paper", "datasheet", "common-practice", "lab")
AXES = ("iso", "perp", "par")
PROVENANCE_STATUSES = ("verified", "corrected", "unverified")
VALUE_KINDS = ("chi", "magnet", "material", "property", "conductivity")
