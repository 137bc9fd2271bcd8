"""One exception type per layer.

Every message names the field (or file, line and column) and what was expected, so the
CLI can print it as one line and exit non-zero.

The field is a name in the library's own terms: a request or record field (``"chi"``,
``"footprint"``, ``"temp_max"``) or a design-file key (``"magnets.size"``,
``"conditions.temp_max"``), never a command-line flag. It is kept apart from the text in
:attr:`MatdbError.field`, so each front end shows it in its own words: the CLI as its
flag (``--chi``), the page as its label ("Susceptibility"). ``str(error)`` reads
``"chi: expected a number such as -1.6e-4, got 'abc'"``.
"""

from __future__ import annotations


class MatdbError(Exception):
    """Base class of every error matdb raises on purpose.

    Parameters
    ----------
    message : str
        What was expected and what was given, without the field name.
    field : str, optional
        The input at fault (see the module docstring); None when no single field is.
    """

    def __init__(self, message: str = "", *, field: str | None = None) -> None:
        self.message = message
        self.field = field
        super().__init__(f"{field}: {message}" if field else message)

    def __reduce__(self):  # keep ``field`` across pickling (process pools, caches)
        return (_rebuild, (type(self), self.message, self.field))

    def shown_as(self, name: str | None) -> str:
        """The message with the field shown as ``name`` (a flag or a label) on one line.

        ``name`` None (or an error without a field) gives ``str(self)`` unchanged.
        """
        text = f"{name}: {self.message}" if (self.field and name) else str(self)
        return " ".join(text.split("\n"))


def _rebuild(cls, message: str, field: str | None) -> MatdbError:
    return cls(message, field=field)


class InputError(MatdbError, ValueError):
    """Something a person typed (CLI argument, design file, form field) is wrong."""


class DataError(MatdbError):
    """Stored or seed data is inconsistent (bad seed row, unknown source key...)."""


class NotFoundError(InputError, LookupError):
    """An id, grade or value id that is not in the database."""


class PhysicsError(MatdbError):
    """A computation has no answer for these inputs (no root, outside the model)."""
