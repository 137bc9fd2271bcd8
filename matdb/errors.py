"""One exception type per layer.

Every message names the field (or file, line and column) and what was expected, so the
CLI can print it as one line and exit non-zero.
"""


class MatdbError(Exception):
    """Base class of every error matdb raises on purpose."""


class InputError(MatdbError, ValueError):
    """Something a person typed (CLI argument, design file, form field) is wrong."""


class DataError(MatdbError):
    """Stored or seed data is inconsistent (bad seed row, unknown source key...)."""


class NotFoundError(InputError, LookupError):
    """An id, grade or value id that is not in the database."""


class PhysicsError(MatdbError):
    """A computation has no answer for these inputs (no root, outside the model)."""
