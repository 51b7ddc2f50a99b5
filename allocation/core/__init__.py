"""Baton's core: the study model, the file format and the analyses, in plain Python.

Nothing here imports Django; the web layer calls in, never the other way round.
"""

from .errors import BatonError, Problem, StudyInvalid, UnknownReference
from .fileformat import LoadResult, dump_study_text, load_study, load_study_text, read_study
from .model import Study
from .writing import study_to_json

__all__ = [
    "BatonError",
    "LoadResult",
    "Problem",
    "Study",
    "StudyInvalid",
    "UnknownReference",
    "dump_study_text",
    "load_study",
    "load_study_text",
    "read_study",
    "study_to_json",
]
