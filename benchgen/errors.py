"""Errors meant for people: each names the field, the value, what is allowed and the fix."""

from __future__ import annotations

import reprlib
from typing import Any

__all__ = ["BenchgenError", "ConfigError", "one_line", "show_value"]

# Values come from user files and may be anything TOML holds: a 1,000-level table (whose plain
# repr recurses past Python's limit), a 16,000-character string, a string with newlines. The
# message shows a bounded, single-line picture of them; the file holds the rest.
_SHOW = reprlib.Repr()
_SHOW.maxlevel = 2
_SHOW.maxdict = 4
_SHOW.maxlist = 4
_SHOW.maxtuple = 4
_SHOW.maxset = 4
_SHOW.maxstring = 60
_SHOW.maxother = 60
_SHOW.maxlong = 40
_MAX_TEXT = 300


def show_value(value: object) -> str:
    """A short, one-line repr of a value from a user's file (bounded in depth and length)."""
    try:
        return one_line(_SHOW.repr(value))
    except (RecursionError, ValueError):  # a pathological object: say what kind it is
        return f"<{type(value).__name__}>"


def one_line(text: str, limit: int = _MAX_TEXT) -> str:
    """``text`` with control characters escaped and cut to ``limit`` characters."""
    if not text.isprintable():
        text = "".join(c if c.isprintable() else repr(c)[1:-1] for c in text)
    return text if len(text) <= limit else text[: limit - 3] + "..."


class BenchgenError(Exception):
    """Base of every error the command line reports without a traceback."""

    exit_status = 1


class ConfigError(BenchgenError):
    """A configuration value that cannot produce a correct core.

    Args:
        field: The config field at fault (``""`` when the whole file is at fault).
        value: The value found, as the user wrote it.
        allowed: What the field accepts.
        fix: One sentence saying what to change.
        source: The file the value came from, if any.
        suggestion: The fix as config changes, field -> new value (``None`` as a value: remove
            the field), when there is one the tool accepts; tools and tests apply it.
    """

    exit_status = 2

    def __init__(
        self,
        field: str,
        value: object,
        allowed: str,
        fix: str,
        *,
        source: str | None = None,
        suggestion: dict[str, Any] | None = None,
    ) -> None:
        self.field = field
        self.value = value
        self.allowed = allowed
        self.fix = fix
        self.source = source
        self.suggestion = suggestion
        super().__init__(self.message)

    @property
    def message(self) -> str:
        """The one-line message: file, field, value, what is allowed, and the fix."""
        where = f"{one_line(self.source)}: " if self.source else ""
        if self.field:
            head = f"{where}field '{one_line(self.field, 80)}' = {show_value(self.value)} is not valid"
        else:
            head = f"{where}{one_line(str(self.value))}"
        return f"{head}: {one_line(self.allowed, 600)}. Fix: {one_line(self.fix, 600)}"

    def with_source(self, source: str) -> ConfigError:
        """Return the same error, naming the file it came from."""
        return ConfigError(
            self.field, self.value, self.allowed, self.fix, source=source, suggestion=self.suggestion
        )
