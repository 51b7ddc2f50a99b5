"""Writes: validate with the core, then persist, inside one transaction.

One module per area; every service is re-exported here, so callers write
``services.study_import(...)``. The edit API the services share (:mod:`.edits`) is
theirs: it is not re-exported.
"""

from .assumptions import *  # noqa: F403 - listed in assumptions.__all__
from .assumptions import __all__ as _assumptions
from .inventory import *  # noqa: F403 - header, agents, events, tasks, links
from .inventory import __all__ as _inventory
from .modes import *  # noqa: F403 - every mode-map edit, listed in modes.__all__
from .modes import __all__ as _modes
from .plans import *  # noqa: F403 - plans and assignments, listed in plans.__all__
from .plans import __all__ as _plans
from .ratings import *  # noqa: F403 - workload ratings, listed in ratings.__all__
from .ratings import __all__ as _ratings
from .reviews import *  # noqa: F403 - comments and decisions, listed in reviews.__all__
from .reviews import __all__ as _reviews
from .simulation import *  # noqa: F403 - runs and their limits, in simulation.__all__
from .simulation import __all__ as _simulation
from .snapshots import *  # noqa: F403 - freeze, restore, verify, in snapshots.__all__
from .snapshots import __all__ as _snapshots
from .spreadsheets import *  # noqa: F403 - preview and apply, in spreadsheets.__all__
from .spreadsheets import __all__ as _spreadsheets
from .studies import (
    LOCAL_USERNAME,
    examples_load,
    local_user_ensure,
    study_create,
    study_import,
)

__all__ = [
    *_assumptions,
    *_inventory,
    *_modes,
    *_plans,
    *_ratings,
    *_reviews,
    *_simulation,
    *_snapshots,
    *_spreadsheets,
    "LOCAL_USERNAME",
    "examples_load",
    "local_user_ensure",
    "study_create",
    "study_import",
]
