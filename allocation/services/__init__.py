"""Writes: validate with the core, then persist, inside one transaction.

One module per area; everything is re-exported here, so callers write
``services.study_import(...)``.
"""

from .studies import (
    LOCAL_USERNAME,
    examples_load,
    local_user_ensure,
    study_create,
    study_import,
)

__all__ = [
    "LOCAL_USERNAME",
    "examples_load",
    "local_user_ensure",
    "study_create",
    "study_import",
]
