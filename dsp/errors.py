"""The project's error type.

Every problem with input data or settings raises :class:`SigtuneError`, a
subclass of :class:`ValueError`, whose message names *where* the problem is
(file, row, channel, dataset or setting), *what* was found and *what would be
valid*. Callers that want one line (the CLI, the app) use ``str(err)``.
"""

from __future__ import annotations

__all__ = ["SigtuneError", "SigtuneWarning"]


class SigtuneError(ValueError):
    """Bad input data or a bad setting, with a message a user can act on.

    Parameters
    ----------
    message : str
        What was found and what would be valid.
    where : str, optional
        The file, row, channel, dataset or setting concerned; prefixed to the
        message as ``"<where>: <message>"``.
    """

    def __init__(self, message: str, where: str | None = None):
        self.where = where
        self.detail = message
        super().__init__(f"{where}: {message}" if where else message)

    def located(self, where: str) -> "SigtuneError":
        """Return a copy whose location is prefixed with ``where`` (a file path, say)."""
        inner = f"{where}, {self.where}" if self.where else where
        return type(self)(self.detail, inner)


class SigtuneWarning(UserWarning):
    """A result was produced but deserves the user's attention."""
