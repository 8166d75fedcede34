"""Files shipped with the package: the Jinja2 templates and print/e-mail CSS.

In a wheel the top-level ``templates/`` folder is installed as ``forebrief/templates`` and found
through :mod:`importlib.resources`; in a source checkout (editable install) the folder beside
``src/`` is used.
"""

from __future__ import annotations

from importlib.resources import files
from importlib.resources.abc import Traversable
from pathlib import Path

__all__ = ["template_root"]


def template_root() -> Traversable:
    """The folder of shipped templates (inside the installed package when there is one)."""
    packaged = files("forebrief") / "templates"
    if packaged.is_dir():
        return packaged
    source = Path(__file__).resolve().parents[3] / "templates"
    if source.is_dir():
        return source
    from forebrief.errors import ConfigError

    raise ConfigError(
        "the shipped templates are missing from this installation; "
        "fix: reinstall forebrief (pip install --force-reinstall forebrief)"
    )
