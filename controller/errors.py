"""Errors meant for people: each carries one line that says what, where and what is allowed."""

from __future__ import annotations


class PrecessError(Exception):
    """Base of every error the CLI reports as one line and a non-zero exit."""

    exit_code: int = 2


class ConfigError(PrecessError):
    """A configuration file is missing, malformed or holds a value that is not allowed."""

    def __init__(self, file: str, key_path: str, message: str) -> None:
        self.file = file
        self.key_path = key_path
        where = f"{file}: {key_path}: " if key_path else f"{file}: "
        super().__init__(where + message)


class InputError(PrecessError):
    """A command-line argument or data file is not usable."""


class DriverError(PrecessError):
    """An instrument did not answer, answered wrongly, or vanished."""

    exit_code = 3


class StoreError(PrecessError):
    """The store could not be opened, read or written."""

    exit_code = 4
