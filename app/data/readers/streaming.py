"""Reading a text table while its bytes arrive, so that parsing overlaps the upload.

:class:`ReadWhileReceiving` stands between an upload's source and the code
that stores it: every chunk read through it is also handed to a parser
thread. Once the first megabyte is in, that thread decides from it alone
whether the file is a text table (:func:`~app.data.readers.detection.text_layout_of_head`)
and, if so, lets pyarrow parse the rest as it comes; the parsing releases the
GIL, so it runs beside the hashing and writing of the same bytes.

When the whole file is stored, :meth:`ReadWhileReceiving.table` returns what
:func:`~app.data.readers.read_table` and
:func:`~app.data.readers.detect_format` give for the stored file. It uses the
early parse only where :func:`read_table` would have used the very same
parse (same head, same layout, same pyarrow options and column types,
same bytes); for anything else (binary formats, files that are refused, a
value that does not fit the type its column has in the head, text that needs
a second pass) it calls :func:`read_table` on the stored file, so tables and
messages are the same either way.
"""

from __future__ import annotations

import threading
from collections import deque
from pathlib import Path
from types import TracebackType
from typing import TYPE_CHECKING, Protocol

import pandas as pd

from app.data.readers.detection import (
    HEAD_BYTES,
    Detected,
    detect_format,
    display_name,
    file_size,
    text_layout_of_head,
)
from app.data.readers.frames import finish_frame
from app.data.readers.limits import DEFAULT_LIMITS, MiB, ReadLimits
from app.data.readers.table import quiet, read_table
from app.data.readers.text import arrow_encoding, needs_second_pass, number_types, parse_text, text_frame
from app.data.readers.text_layout import TextLayout

if TYPE_CHECKING:
    import pyarrow as pa

PIPE_BYTES = 16 * MiB
"""Most bytes held for the parser; the upload waits when it is this far ahead of the parsing."""


class Readable(Protocol):
    """Anything with a binary ``read(size)`` that returns ``b""`` at the end."""

    def read(self, size: int = -1, /) -> bytes | memoryview: ...


class _Abandoned(Exception):
    """The bytes stopped before their end: the upload failed or was refused."""


class _Pipe:
    """Bytes passed from the receiving thread to the parser thread, at most ``limit`` of them waiting.

    More wait only while the parser asks for a larger block at once.

    The receiving side calls :meth:`write`, then :meth:`end` (or :meth:`fail`).
    The parser side reads it as a binary file (pyarrow asks for blocks of a
    fixed size); when it stops reading, :meth:`abandon` drops what waits and
    makes later writes free.
    """

    def __init__(self, *, limit: int) -> None:
        self._limit = limit
        self._changed = threading.Condition()
        self._chunks: deque[memoryview] = deque()
        self._waiting = 0
        self._wanted = 0
        self._ended = False
        self._failed = False
        self._abandoned = False
        self.closed = False  # pyarrow checks it before reading

    # -- receiving side ----------------------------------------------------------

    def write(self, chunk: bytes | memoryview) -> None:
        """Add the next bytes, waiting while the parser is ``limit`` bytes behind."""
        with self._changed:
            while self._waiting >= max(self._limit, self._wanted) and not self._abandoned:
                self._changed.wait()
            if self._abandoned:
                return
            self._chunks.append(memoryview(chunk))
            self._waiting += len(chunk)
            self._changed.notify_all()

    def end(self) -> None:
        """All bytes were written."""
        with self._changed:
            self._ended = True
            self._changed.notify_all()

    def fail(self) -> None:
        """The bytes will not be complete: the parser's next read raises."""
        with self._changed:
            self._failed = True
            self._changed.notify_all()

    # -- parser side -------------------------------------------------------------

    def peek(self, size: int) -> bytes:
        """The first ``size`` bytes not yet read (fewer at the end), leaving them to be read."""
        with self._changed:
            self._wait_for(size)
            return b"".join(self._chunks)[:size]

    def read(self, size: int = -1, /) -> bytes:
        """Exactly ``size`` bytes (all the rest when negative), fewer only at the end, ``b""`` after it."""
        with self._changed:
            self._wait_for(size)
            parts: list[memoryview] = []
            wanted = self._waiting if size < 0 else min(size, self._waiting)
            taken = 0
            while taken < wanted:
                chunk = self._chunks.popleft()
                if taken + len(chunk) > wanted:
                    self._chunks.appendleft(chunk[wanted - taken :])
                    chunk = chunk[: wanted - taken]
                parts.append(chunk)
                taken += len(chunk)
            self._waiting -= taken
            self._changed.notify_all()
        return b"".join(parts)

    def readable(self) -> bool:
        """A pipe is read from, never written to, by its reader."""
        return True

    def abandon(self) -> None:
        """The parser reads no more: drop what waits and let later writes pass without waiting."""
        with self._changed:
            self._abandoned = True
            self._chunks.clear()
            self._waiting = 0
            self._changed.notify_all()

    def _wait_for(self, size: int) -> None:
        while not self._failed and not self._ended and (size < 0 or self._waiting < size):
            self._wanted = size if size >= 0 else self._waiting + self._limit
            self._changed.notify_all()  # a writer held back by the limit may go on
            self._changed.wait()
        self._wanted = 0
        if self._failed:
            raise _Abandoned("the bytes stopped before their end")


class ReadWhileReceiving:
    """A pass-through reader of ``source`` that parses a text table from the bytes read through it.

    Use it as a context manager, read ``source`` through it to its end (an
    empty read), store those bytes, then call :meth:`table` with the stored
    file. Leaving the ``with`` block stops the parser thread; when that
    happens before the end of ``source`` (an upload that failed), the parse
    is abandoned.

    Parameters
    ----------
    source
        Where the bytes come from.
    name
        The file name the user gave, as for :func:`~app.data.readers.read_table`
        (its extension is checked); it must not be empty.
    limits
        Size limits, as for :func:`~app.data.readers.read_table`.
    """

    def __init__(self, source: Readable, *, name: str, limits: ReadLimits | None = None) -> None:
        if not name:
            raise ValueError("the file name must not be empty")
        self._source = source
        self._name = name
        self._limits = limits or DEFAULT_LIMITS
        self._pipe = _Pipe(limit=PIPE_BYTES)
        self._size = 0
        self._parsed: tuple[TextLayout, pa.Table] | None = None
        self._parser = threading.Thread(target=self._parse, name="secondstage-read-while-receiving", daemon=True)

    def __enter__(self) -> ReadWhileReceiving:
        self._parser.start()
        return self

    def __exit__(
        self, kind: type[BaseException] | None, error: BaseException | None, traceback: TracebackType | None
    ) -> None:
        self._pipe.fail()
        self._parser.join()

    def read(self, size: int = -1, /) -> bytes | memoryview:
        """The next bytes of ``source``; the parser gets them too."""
        chunk = self._source.read(size)
        if chunk:
            self._size += len(chunk)
            self._pipe.write(chunk)
        else:
            self._pipe.end()
        return chunk

    def table(self, path: Path) -> tuple[pd.DataFrame, str]:
        """The table of the stored file and its format, as ``read_table`` and ``detect_format`` give them.

        Parameters
        ----------
        path
            The stored file: exactly the bytes read through this object.

        Raises
        ------
        DataFileError
            As :func:`~app.data.readers.read_table` does for this file.
        """
        self._pipe.end()  # the stored file holds what was read through; nothing more comes
        self._parser.join()
        display = display_name(path, self._name)
        parsed = self._parsed
        size = file_size(path, display)
        if parsed is not None and size == self._size and size <= self._limits.max_bytes:
            layout, arrow_table = parsed
            with quiet():
                frame = text_frame(arrow_table, display, self._limits)
            return finish_frame(frame, display, self._limits), Detected.of_text(layout).format
        return read_table(path, name=self._name, limits=self._limits), detect_format(path, name=self._name)

    def _parse(self) -> None:
        """The parser thread: the text table from the pipe, when the head shows it is one and it parses at once."""
        try:
            head = self._pipe.peek(HEAD_BYTES + 1)
            layout = text_layout_of_head(head[:HEAD_BYTES], self._name, whole=len(head) <= HEAD_BYTES)
            if layout is None or layout.n_header_fields > self._limits.max_columns:
                return
            arrow_table = parse_text(
                self._pipe,
                layout,
                encoding=arrow_encoding(layout),
                newlines_in_values=layout.newlines_in_values,
                types=number_types(head[:HEAD_BYTES], layout),
            )
            if not needs_second_pass(arrow_table, layout):
                self._parsed = (layout, arrow_table)
        except Exception:  # noqa: BLE001 - any failure leaves the stored file to read_table, which says what is wrong
            return
        finally:
            self._pipe.abandon()
