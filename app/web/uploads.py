"""Streaming a multipart upload straight into the file store.

The request body is parsed as it arrives and the bytes of the ``file`` field
are handed, chunk by chunk, to :func:`app.services.datasets.upload_dataset`,
which hashes and writes them into the data directory's own ``incoming``
folder. The upload is therefore written once, never spooled to the system's
temporary folder (it stays inside the data directory), and a file over the
limit is refused while it arrives.

The service runs on a worker thread and reads through :class:`MultipartUpload`.
Meanwhile the event loop reads the body ahead of it, up to
:data:`READ_AHEAD_BYTES`, so that the transfer goes on while the worker
hashes, writes and parses what has arrived (the server stops reading from
the socket when nobody takes the body).

A browser's upload is a state-changing request made with the session cookie,
so it must carry the form token: in the ``X-CSRF-Token`` header, or in the
``csrf_token`` field *before* the file field (the upload form puts it first).
It is checked as soon as the file's headers arrive, before a byte of the file
is stored.
"""

from __future__ import annotations

import threading
from collections import deque
from collections.abc import AsyncIterator, Callable
from typing import TypeVar

import anyio
import anyio.from_thread
from fastapi import Request
from python_multipart.multipart import MultipartParser, parse_options_header
from starlette.concurrency import run_in_threadpool
from starlette.requests import ClientDisconnect

from app.auth import csrf
from app.errors import DataFileError
from app.services import datasets
from app.services.context import ServiceContext
from app.services.views import DatasetDetail
from app.web.identity import check_form_token
from app.web.rendering import check_declared_size

FILE_FIELD = "file"
READ_AHEAD_BYTES = 16 << 20
"""Most body bytes read ahead of the worker thread."""
MAX_FIELD_BYTES = 64 * 1024
"""Other form fields (not the file) are small; longer ones are refused."""


async def receive_dataset(request: Request, ctx: ServiceContext, *, case_id: int) -> DatasetDetail:
    """Store the request's ``file`` field as the case's next data version.

    Raises
    ------
    DataFileError
        The request is not a multipart form with a ``file`` field, is cut
        short, or the file cannot be read as a table (the service's message).
    """
    header_token = request.headers.get(csrf.HEADER)
    if header_token is not None or not request.headers.get("content-type", "").startswith("multipart/form-data"):
        check_form_token(request, header_token)
    check_declared_size(request, limit=ctx.settings.max_upload_bytes)
    upload = MultipartUpload.from_request(request)

    def store() -> DatasetDetail:
        file_name = upload.open_file()
        if header_token is None:
            check_form_token(request, upload.fields_before_file.get(csrf.FIELD))
        return datasets.upload_dataset(ctx, case_id=case_id, source=upload, file_name=file_name)

    return await upload.run(store)


Result = TypeVar("Result")


class _ReadAhead:
    """Blocks of the body passed from the event loop to the worker thread, at most ``limit`` bytes waiting.

    On the event loop, :meth:`put` waits while the worker is ``limit`` bytes
    behind, until it has taken half of them. The worker's :meth:`take` waits
    on a thread condition, so handing a block over needs no trip through the
    event loop.
    """

    def __init__(self, *, limit: int) -> None:
        self._limit = limit
        self._changed = threading.Condition()
        self._blocks: deque[bytes] = deque()
        self._waiting = 0
        self._room: anyio.Event | None = None
        self._ended = False
        self._closed = False

    async def put(self, block: bytes) -> bool:
        """Hand a block to the worker (event loop); ``False``, and the block not kept, once the worker is done.

        A block put while the worker was finishing is among those :meth:`close` returns.
        """
        with self._changed:
            if self._closed:
                return False
            self._blocks.append(block)
            self._waiting += len(block)
            self._changed.notify()
            if self._waiting < self._limit:
                return True
            room = self._room = anyio.Event()
        await room.wait()
        return not self._closed

    def end(self) -> None:
        """The body has no more blocks (event loop)."""
        with self._changed:
            self._ended = True
            self._changed.notify()

    def close(self) -> list[bytes]:
        """The worker is done (event loop): stop handing blocks over; returns the blocks it did not take."""
        with self._changed:
            self._closed = True
            left, self._blocks = list(self._blocks), deque()
            room, self._room = self._room, None
        if room is not None:
            room.set()
        return left

    def take(self) -> bytes:
        """The next block (worker thread), waiting for it; ``b""`` when the body has ended."""
        with self._changed:
            while not self._blocks and not self._ended:
                self._changed.wait()
            if not self._blocks:
                return b""
            block = self._blocks.popleft()
            self._waiting -= len(block)
            room = self._room if self._waiting <= self._limit // 2 else None
            if room is not None:
                self._room = None
        if room is not None:
            anyio.from_thread.run_sync(room.set)
        return block


class MultipartUpload:
    """The ``file`` field of a multipart/form-data body as a readable binary stream.

    Use from a worker thread: :meth:`open_file` reads up to the file's own
    headers and returns its name; :meth:`read` then returns its bytes and
    ``b""`` at its end. Other fields are kept in :attr:`fields`; those that
    came before the file, in :attr:`fields_before_file` (whatever the size of
    the blocks the body arrived in).
    """

    def __init__(self, body: AsyncIterator[bytes], *, boundary: bytes) -> None:
        self._body = body
        self._ahead = _ReadAhead(limit=READ_AHEAD_BYTES)
        self._parser = MultipartParser(
            boundary,
            callbacks={
                "on_part_begin": self._part_begin,
                "on_header_field": self._header_field,
                "on_header_value": self._header_value,
                "on_header_end": self._header_end,
                "on_headers_finished": self._headers_finished,
                "on_part_data": self._part_data,
                "on_part_end": self._part_end,
            },
        )
        self._header_name = bytearray()
        self._header_value = bytearray()
        self._headers: dict[bytes, bytes] = {}
        self._part: str | None = None
        self._field_value = bytearray()
        self._chunks: deque[bytes | memoryview] = deque()
        self.file_name: str | None = None
        self.file_finished = False
        self.fields: dict[str, str] = {}
        self.fields_before_file: dict[str, str] = {}

    @classmethod
    def from_request(cls, request: Request) -> MultipartUpload:
        """The upload in a request's body; the content type must be multipart/form-data with a boundary."""
        kind, options = parse_options_header(request.headers.get("content-type", ""))
        boundary = options.get(b"boundary")
        if kind != b"multipart/form-data" or not boundary:
            raise DataFileError(
                f"choose a data file to upload (it is sent as a multipart/form-data form with the field '{FILE_FIELD}')"
            )
        return cls(request.stream(), boundary=boundary)

    async def run(self, work: Callable[[], Result]) -> Result:
        """Run ``work`` on a worker thread while the body is read ahead for it; return its result.

        ``work`` reads the upload with :meth:`open_file` and :meth:`read`.
        When it returns, the rest of the body (the closing boundary, later
        fields) is read; when it raises, nothing more is read and its error
        is raised here.
        """
        result: list[Result] = []
        failure: list[Exception] = []
        untaken: list[bytes] = []

        async def on_worker() -> None:
            try:
                result.append(await run_in_threadpool(work))
            except Exception as error:  # noqa: BLE001 - raised again below, outside the task group
                failure.append(error)
            finally:
                untaken.extend(self._ahead.close())

        async with anyio.create_task_group() as tasks:
            tasks.start_soon(on_worker)
            untaken_part = await self._read_ahead()
        if failure:
            raise failure[0]
        for block in (*untaken, untaken_part):
            self._feed(block)
        while self._feed(await self._next_part()):
            pass
        return result[0]

    # -- worker thread side --------------------------------------------------------

    def open_file(self) -> str:
        """Read the body up to the start of the file's bytes; return the file's name."""
        while self.file_name is None:
            if not self._feed(self._ahead.take()):
                raise DataFileError(f"choose a data file to upload (the form has no file in the field '{FILE_FIELD}')")
        return self.file_name

    def read(self, size: int = -1, /) -> bytes | memoryview:
        """The file's next bytes (at most ``size``, all that have arrived when negative); empty at its end."""
        while not self._chunks and not self.file_finished:
            if not self._feed(self._ahead.take()):
                raise DataFileError("the upload was cut off before the end of the file; try again")
        if not self._chunks:
            return b""
        chunk = self._chunks.popleft()
        if 0 <= size < len(chunk):
            view = memoryview(chunk)
            self._chunks.appendleft(view[size:])
            chunk = view[:size]
        return chunk

    # -- event loop side -------------------------------------------------------------

    async def _read_ahead(self) -> bytes:
        """Pass the body to the worker as it arrives, until its end or until the worker is done.

        Returns the part read after the worker was done (``b""`` if none).
        """
        try:
            while part := await self._next_part():
                if not await self._ahead.put(part):
                    return part
        except ClientDisconnect:
            pass  # the worker finds the file cut off
        finally:
            self._ahead.end()
        return b""

    async def _next_part(self) -> bytes:
        """The next part of the body as the server received it, or ``b""`` at its end."""
        try:
            return await self._body.__anext__()
        except StopAsyncIteration:
            return b""

    # -- parsing ---------------------------------------------------------------------

    def _feed(self, block: bytes) -> bool:
        if not block:
            return False
        self._parser.write(block)
        return True

    def _part_begin(self) -> None:
        self._headers = {}
        self._part = None
        self._field_value = bytearray()

    def _header_field(self, data: bytes, start: int, end: int) -> None:
        self._header_name += data[start:end]

    def _header_value(self, data: bytes, start: int, end: int) -> None:
        self._header_value += data[start:end]

    def _header_end(self) -> None:
        self._headers[bytes(self._header_name).lower()] = bytes(self._header_value)
        self._header_name = bytearray()
        self._header_value = bytearray()

    def _headers_finished(self) -> None:
        _, options = parse_options_header(self._headers.get(b"content-disposition", b""))
        name = options.get(b"name", b"").decode("utf-8", "replace")
        file_name = options.get(b"filename")
        if name == FILE_FIELD and file_name is not None and self.file_name is None:
            self._part = "file"
            self.file_name = file_name.decode("utf-8", "replace")
            self.fields_before_file = dict(self.fields)
        elif file_name is not None:
            self._part = None  # a file in another field, or a second file: skipped
        else:
            self._part = name

    def _part_data(self, data: bytes, start: int, end: int) -> None:
        if self._part == "file":
            # A view, not a copy: the body's blocks are immutable bytes, and most of a block is file.
            self._chunks.append(data if start == 0 and end == len(data) else memoryview(data)[start:end])
            return
        if self._part is None:
            return
        self._field_value += data[start:end]
        if len(self._field_value) > MAX_FIELD_BYTES:
            raise DataFileError(f"the form field '{self._part}' is longer than {MAX_FIELD_BYTES} bytes")

    def _part_end(self) -> None:
        if self._part == "file":
            self.file_finished = True
        elif self._part:
            self.fields[self._part] = self._field_value.decode("utf-8", "replace")
