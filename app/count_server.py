"""Child process that certifies level counts for the window (``python -m app.count_server``).

The window (:class:`app.checks.CountProcess`) starts it once and sends requests over its standard
input; each request and reply is a length-prefixed pickle exchanged only between the window and
this child, never read from or written to a file.  Run as its own program (not through
``multiprocessing``), it never re-imports the script that opened the window.
"""
from __future__ import annotations

import pickle
import struct
import sys

_HEADER = struct.Struct("<Q")


def read_message(stream):
    """One length-prefixed pickle from ``stream``; None at the end of the stream."""
    head = stream.read(_HEADER.size)
    if len(head) < _HEADER.size:
        return None
    (n,) = _HEADER.unpack(head)
    body = stream.read(n)
    if len(body) < n:
        return None
    return pickle.loads(body)


def write_message(stream, obj) -> None:
    body = pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)
    stream.write(_HEADER.pack(len(body)))
    stream.write(body)
    stream.flush()


def main() -> int:
    requests, replies = sys.stdin.buffer, sys.stdout.buffer
    sys.stdout = sys.stderr                     # nothing printed by a library may corrupt the replies
    from threadpoolctl import threadpool_limits

    from core.inertia import certify_count
    while True:
        request = read_message(requests)
        if request is None:
            return 0
        hamiltonian, spectrum, max_seconds = request
        try:
            # one BLAS thread: a background check must not fight the window's solves for the cores
            # (a dense LDL^T of 3600 unknowns took 0.8 s on one thread, 21 s with two oversubscribed)
            with threadpool_limits(limits=1, user_api="blas"):
                reply = ("ok", certify_count(hamiltonian, spectrum, max_seconds=max_seconds))
        except Exception as exc:                # noqa: BLE001 - reported to the window as a message
            reply = ("error", f"{type(exc).__name__}: {exc}")
        write_message(replies, reply)


if __name__ == "__main__":
    sys.exit(main())
