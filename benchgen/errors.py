"""Errors meant for people: each names the field, the value, what is allowed and the fix."""

from __future__ import annotations

__all__ = ["BenchgenError", "ConfigError"]


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
    ) -> None:
        self.field = field
        self.value = value
        self.allowed = allowed
        self.fix = fix
        self.source = source
        super().__init__(self.message)

    @property
    def message(self) -> str:
        where = f"{self.source}: " if self.source else ""
        if self.field:
            head = f"{where}field '{self.field}' = {self.value!r} is not valid"
        else:
            head = f"{where}{self.value}"
        return f"{head}: {self.allowed}. Fix: {self.fix}"

    def with_source(self, source: str) -> ConfigError:
        """Return the same error, naming the file it came from."""
        return ConfigError(self.field, self.value, self.allowed, self.fix, source=source)
