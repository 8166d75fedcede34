"""The one exception tree of forebrief.

::

    ForebriefError                 base: the command line catches this and only this
     +-- InputError                a forecast or observation file cannot be used as a whole
     +-- ConfigError               a bad key or value in forebrief.toml or on the command line
     +-- ArchiveError              the dated record cannot be written, read or verified
     +-- DeliveryError             an e-mail could not be built or sent

Every message names the file (and row or key where there is one), the bad value, and the fix.
Row-level problems in input files are not exceptions: they are collected as ``Problem``
records by :mod:`forebrief.tables.validate`, and the bad forecast is quarantined.
"""

from __future__ import annotations

__all__ = ["ArchiveError", "ConfigError", "DeliveryError", "ForebriefError", "InputError"]


class ForebriefError(Exception):
    """Base class of every error forebrief raises on purpose."""

    exit_code: int = 1


class InputError(ForebriefError):
    """An input file is missing, unreadable, or lacks required columns."""


class ConfigError(ForebriefError):
    """A configuration key or option value is invalid."""

    exit_code = 2


class ArchiveError(ForebriefError):
    """A record cannot be written, or the archive fails verification."""


class DeliveryError(ForebriefError):
    """An e-mail cannot be built or sent."""
