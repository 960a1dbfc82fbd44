"""Where the files shipped with Broodline are: colony models and templates.

In a clone they are the top-level ``models/`` and ``templates/`` folders; an installed
wheel carries a copy under ``planner/_bundled/`` (see pyproject.toml).
"""

from __future__ import annotations

from pathlib import Path

from planner.errors import InputError

__all__ = ["bundled_path"]

_HERE = Path(__file__).resolve().parent


def bundled_path(*parts: str) -> Path:
    """Path of a shipped file, e.g. ``bundled_path("models", "demo.toml")``."""
    for root in (_HERE / "_bundled", _HERE.parent):
        candidate = root.joinpath(*parts)
        if candidate.exists():
            return candidate
    raise InputError("this shipped file is missing from the installation; reinstall broodline",
                     source="/".join(parts))
