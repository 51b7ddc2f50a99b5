"""Values every page needs: the version and the cautions."""

from django.http import HttpRequest

from allocation import __version__
from allocation.core.cautions import CAUTIONS


def baton(request: HttpRequest) -> dict[str, object]:
    return {"baton_version": __version__, "cautions": CAUTIONS}
