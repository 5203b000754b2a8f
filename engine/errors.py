"""One exception family for the whole engine.

Every message names the file (where there is one), the field and what was expected,
so that the command line can print it as it is and exit with status 2.
"""

from __future__ import annotations


class EngineError(Exception):
    """Base class of every error the engine raises on purpose."""


class InputError(EngineError, ValueError):
    """Bad input: a file, an option or an argument that cannot be used as given."""


class ArchiveError(EngineError):
    """The archive cannot be opened, read or written as asked."""


class EngineWarning(UserWarning):
    """A silent adjustment the caller should know about (fewer averages, clipping...)."""


def where(source: str | None) -> str:
    """Prefix for messages: ``"file.wav: "`` or ``""`` when there is no file."""
    return f"{source}: " if source else ""
