"""forebrief: weekly briefings from probabilistic epidemic forecasts.

Read and validate submissions and observations, score every model (Cooke's Classical Model,
weighted interval score, coverage, point error, relative skill against a persistence
baseline), pool the models into ensembles with only what was known on the issue date, and
write a plain-language briefing with its record.
"""

from __future__ import annotations

from forebrief.errors import ArchiveError, ConfigError, DeliveryError, ForebriefError, InputError
from forebrief.version import __version__

__all__ = [
    "ArchiveError",
    "ConfigError",
    "DeliveryError",
    "ForebriefError",
    "InputError",
    "__version__",
]
