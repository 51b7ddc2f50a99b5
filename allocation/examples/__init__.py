"""The example studies shipped with Baton, as study files (format version 2).

All three are invented for Baton: no real people, products or brands.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

__all__ = ["EXAMPLES_DIR", "example_documents", "example_paths"]

EXAMPLES_DIR = Path(__file__).resolve().parent


def example_paths() -> list[Path]:
    """The example study files, in name order."""
    return sorted(EXAMPLES_DIR.glob("*.json"))


def example_documents() -> list[dict[str, Any]]:
    """Each example study file, decoded."""
    return [json.loads(path.read_text(encoding="utf-8")) for path in example_paths()]
