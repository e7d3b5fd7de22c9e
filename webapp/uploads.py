"""Receiving a multipart upload: each file streamed to a private spool file, names decoded leniently.

Werkzeug's own form parser keeps nothing when one part's headers are not UTF-8 (the whole upload
arrives empty), and its part limit answers with the generic "too large" message. The upload routes
read the body here instead, with werkzeug's sans-IO multipart decoder: a header that is not UTF-8
is read as Latin-1 (what HTTP headers were before UTF-8), each file goes to disk in 1 MB steps
while its sha256 is taken (64 KB at a time), and too many parts get a message of their own.
"""

from __future__ import annotations

import hashlib
import os
import secrets
from dataclasses import dataclass, field
from pathlib import Path

from flask import g, request
from werkzeug.datastructures import Headers
from werkzeug.exceptions import BadRequest, RequestEntityTooLarge
from werkzeug.http import parse_options_header
from werkzeug.sansio.multipart import Data, Epilogue, Field, File, MultipartDecoder, NeedData

CHUNK = 64 * 1024  # read size; the decoder's buffer bound (below) must stay above it
MAX_FIELD_BYTES = 64 * 1024  # plain form fields (the CSRF token) are short


class LenientDecoder(MultipartDecoder):
    """Part headers as UTF-8, or as Latin-1 when they are not valid UTF-8."""

    def _parse_headers(self, data) -> Headers:
        try:
            bytes(data).decode("utf-8")
        except UnicodeDecodeError:
            data = bytes(data).decode("latin-1").encode("utf-8")
        return super()._parse_headers(data)


@dataclass
class Part:
    """One uploaded file: its name as sent, and where its bytes wait (``path``) until stored."""

    filename: str
    path: Path
    sha256: str
    size: int


@dataclass
class Received:
    fields: dict = field(default_factory=dict)
    parts: list = field(default_factory=list)
    too_many: int = 0  # parts over the file limit, counted and discarded

    def discard(self) -> None:
        for p in self.parts:
            p.path.unlink(missing_ok=True)


def _spool_target(root) -> tuple[Path, object]:
    folder = Path(root) / "tmp"
    folder.mkdir(mode=0o700, parents=True, exist_ok=True)
    path = folder / f"upload-{secrets.token_hex(8)}"
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    return path, os.fdopen(fd, "wb")


def receive(root, *, max_files: int) -> Received:
    """Read this request's multipart body (once per request; later calls get the same result)."""
    if "eightfold_upload" in g:
        return g.eightfold_upload
    got = Received()
    g.eightfold_upload = got
    mimetype, options = parse_options_header(request.headers.get("Content-Type", ""))
    if mimetype != "multipart/form-data" or not options.get("boundary"):
        return got
    # Parts beyond the file limit are still read (and dropped), up to a bound on the work.
    # max_form_memory_size bounds the decoder's buffer (a part's headers, or one chunk of data).
    decoder = LenientDecoder(options["boundary"].encode("latin-1"), max_form_memory_size=4 * CHUNK,
                             max_parts=4 * max_files + 16)
    stream = request.stream  # werkzeug stops it at MAX_CONTENT_LENGTH with a 413
    current, sink, hasher, size, field_bytes, parts_seen = None, None, None, 0, [], 0
    try:
        while True:
            chunk = stream.read(CHUNK)
            decoder.receive_data(chunk or None)
            event = decoder.next_event()
            while not isinstance(event, (NeedData, Epilogue)):
                if isinstance(event, (File, Field)):
                    parts_seen += 1
                if isinstance(event, File):
                    current, size = event, 0
                    if len(got.parts) >= max_files:
                        sink, hasher = None, None
                        got.too_many += 1
                    else:
                        path, sink = _spool_target(root)
                        hasher = hashlib.sha256()
                        got.parts.append(Part(event.filename or "", path, "", 0))
                elif isinstance(event, Field):
                    current, field_bytes = event, []
                elif isinstance(event, Data):
                    if isinstance(current, File):
                        if sink is not None:
                            sink.write(event.data)
                            hasher.update(event.data)
                            size += len(event.data)
                        if not event.more_data and sink is not None:
                            sink.close()
                            got.parts[-1].sha256, got.parts[-1].size = hasher.hexdigest(), size
                            sink = None
                    elif isinstance(current, Field):
                        field_bytes.append(event.data)
                        if sum(map(len, field_bytes)) > MAX_FIELD_BYTES:
                            raise RequestEntityTooLarge(description=f"form field {current.name!r} is too long")
                        if not event.more_data:
                            got.fields[current.name] = b"".join(field_bytes).decode("utf-8", "replace")
                event = decoder.next_event()
            if isinstance(event, Epilogue) or not chunk:
                break
    except RequestEntityTooLarge as exc:
        got.discard()
        if parts_seen >= decoder.max_parts:
            raise RequestEntityTooLarge(
                description=f"too many files in one upload: a sample set holds at most {max_files}") from None
        raise
    except ValueError as exc:
        got.discard()
        raise BadRequest(description=f"the upload is not valid multipart form data ({exc})") from None
    except BaseException:  # a client that hangs up mid-file, for one
        got.discard()
        raise
    finally:
        if sink is not None:
            sink.close()
    return got


def init_app(app) -> None:
    @app.teardown_request
    def _drop_spooled(exc=None):
        # Files stored as blobs were moved already; anything left (rejects, errors) goes now.
        got = g.pop("eightfold_upload", None)
        if got is not None:
            got.discard()
