"""Length-prefixed pickle frames between netloop and its ngspice worker process."""

from __future__ import annotations

import os
import pickle
import select
import struct
import time
from typing import Any, BinaryIO

__all__ = ["FrameTimeout", "WorkerGone", "read_frame", "read_frame_fd", "write_frame"]

_HEADER = struct.Struct("<Q")


class WorkerGone(Exception):
    """The other end closed the pipe (the worker died)."""


class FrameTimeout(Exception):
    """No complete frame arrived before the deadline."""


def write_frame(stream: BinaryIO, obj: Any) -> None:
    body = pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)
    stream.write(_HEADER.pack(len(body)) + body)
    stream.flush()


def read_frame(stream: BinaryIO) -> Any:
    """Blocking read of one frame (the worker's side); raises WorkerGone at end of input."""
    head = stream.read(_HEADER.size)
    if len(head) < _HEADER.size:
        raise WorkerGone
    (size,) = _HEADER.unpack(head)
    body = stream.read(size)
    if len(body) < size:
        raise WorkerGone
    return pickle.loads(body)


def _read_exact(fd: int, size: int, deadline: float) -> bytes:
    chunks, got = [], 0
    while got < size:
        remaining = deadline - time.monotonic()
        if remaining <= 0:
            raise FrameTimeout
        ready, _, _ = select.select([fd], [], [], remaining)
        if not ready:
            raise FrameTimeout
        chunk = os.read(fd, min(size - got, 1 << 20))
        if not chunk:
            raise WorkerGone
        chunks.append(chunk)
        got += len(chunk)
    return b"".join(chunks)


def read_frame_fd(fd: int, timeout_s: float) -> Any:
    """Read one frame from a raw pipe descriptor, giving up after ``timeout_s`` (the parent's side)."""
    deadline = time.monotonic() + timeout_s
    (size,) = _HEADER.unpack(_read_exact(fd, _HEADER.size, deadline))
    return pickle.loads(_read_exact(fd, size, deadline))
