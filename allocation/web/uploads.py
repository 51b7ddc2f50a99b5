"""Uploads too large for Baton are refused before their bytes are kept anywhere.

Two guards, because Django reads a multipart body before a view runs (the CSRF check
reads the form's token from it):

- :class:`SizeLimitedUploadHandler`, first in ``FILE_UPLOAD_HANDLERS``, skips every file
  of a request whose declared length is over ``BATON_MAX_REQUEST_BYTES``, and any file
  whose bytes pass it as they arrive (a chunked request declares no length). A skipped
  file's bytes are read from the connection and dropped, so nothing reaches memory, the
  temporary folder, or the database.
- :func:`upload_refusal`, called by each upload view before it touches
  ``request.FILES``, turns that into a message naming the limit.
"""

from __future__ import annotations

from django.conf import settings
from django.core.files.uploadhandler import FileUploadHandler, SkipFile
from django.http import HttpRequest

#: Room for the multipart boundaries, headers and the CSRF token around one file.
MULTIPART_SLACK = 64 * 1024

_REFUSED = "_baton_upload_too_large"


def _mib(size: int) -> str:
    return f"{size / (1024 * 1024):g} MiB"


class SizeLimitedUploadHandler(FileUploadHandler):
    """Skip the files of an oversized request; pass every other chunk on unchanged."""

    def handle_raw_input(self, input_data, META, content_length, boundary, encoding=None):
        self.received = 0
        if content_length and content_length > settings.BATON_MAX_REQUEST_BYTES:
            setattr(self.request, _REFUSED, True)
        return None

    def new_file(self, *args, **kwargs) -> None:
        super().new_file(*args, **kwargs)
        self.received = 0
        if getattr(self.request, _REFUSED, False):
            raise SkipFile()

    def receive_data_chunk(self, raw_data: bytes, start: int) -> bytes:
        self.received += len(raw_data)
        if self.received > settings.BATON_MAX_REQUEST_BYTES:
            setattr(self.request, _REFUSED, True)
            raise SkipFile()
        return raw_data

    def file_complete(self, file_size: int) -> None:
        return None


def upload_refusal(request: HttpRequest, limit: int, what: str) -> str | None:
    """Why this request's upload is refused for its size (``None``: it is not), judged
    from its declared length before the body is read, and from what the handler saw.

    ``limit`` is the largest file the view accepts, in bytes; ``what`` names the file in
    the message ("the study file", "the spreadsheet").
    """
    try:
        declared = int(request.META.get("CONTENT_LENGTH") or 0)
    except ValueError:
        declared = 0
    if declared > limit + MULTIPART_SLACK or getattr(request, _REFUSED, False):
        return (
            f"{what} is larger than {_mib(limit)}, the most Baton reads; it was refused "
            "before it was read"
        )
    return None
