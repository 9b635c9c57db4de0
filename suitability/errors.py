"""Exception hierarchy.

Every error the tool raises on purpose derives from :class:`SuitabilityError`. Each subclass also derives
from the matching built-in exception, so callers may catch either ``ConfigError`` or ``ValueError``.
The command line maps them to exit codes: config errors 2, input-data errors 3, output errors 4.
"""

from __future__ import annotations


class SuitabilityError(Exception):
    """Root of all errors raised deliberately by suitability."""

    exit_code = 1


class ConfigError(SuitabilityError, ValueError):
    """The YAML config (or an equivalent Python object) is invalid. Message names the key and the file."""

    exit_code = 2


class InputDataError(SuitabilityError, ValueError):
    """An input layer is missing, unreadable, or not what the config declares. Message names the file."""

    exit_code = 3


class OutputError(SuitabilityError, OSError):
    """Outputs cannot be written (folder not writable, disk full, outputs exist, folder locked)."""

    exit_code = 4
