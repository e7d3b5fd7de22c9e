"""Where the top-level ``templates/`` and ``static/`` folders live.

Eightfold ships as an editable install (or runs from a checkout), so both folders sit beside the
``webapp`` package in the repository root.
"""

from __future__ import annotations

from pathlib import Path

REPO_ROOT = Path(__file__).resolve().parent.parent
TEMPLATES_DIR = REPO_ROOT / "templates"
STATIC_DIR = REPO_ROOT / "static"
DEMO_DIR = REPO_ROOT / "demo_images"
