"""Writes: validate with the core, then persist, inside one transaction.

One module per area; everything is re-exported here, so callers write
``services.study_import(...)``.
"""

from .assumptions import *  # noqa: F403 - listed in assumptions.__all__
from .assumptions import __all__ as _assumptions
from .editing import *  # noqa: F403 - every edit, listed in editing.__all__
from .editing import __all__ as _editing
from .modemaps import *  # noqa: F403 - every mode-map edit, listed in modemaps.__all__
from .modemaps import __all__ as _modemaps
from .simulations import *  # noqa: F403 - runs and their limits, in simulations.__all__
from .simulations import __all__ as _simulations
from .studies import (
    LOCAL_USERNAME,
    examples_load,
    local_user_ensure,
    study_create,
    study_import,
)

__all__ = [
    *_assumptions,
    *_editing,
    *_modemaps,
    *_simulations,
    "LOCAL_USERNAME",
    "examples_load",
    "local_user_ensure",
    "study_create",
    "study_import",
]
