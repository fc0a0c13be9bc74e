"""The worker process that hosts libngspice, so that a crash or hang never takes netloop down.

Run as ``python -m netloop.sim.worker LIBRARY_PATH``. Requests arrive as frames on stdin, replies
leave as frames on the original stdout; everything printed (by C or Python) goes to stderr.
"""

from __future__ import annotations

import os
import sys
import traceback

from netloop.sim.protocol import WorkerGone, read_frame, write_frame


def main(argv: list[str]) -> int:
    replies = os.fdopen(os.dup(1), "wb")
    os.dup2(2, 1)  # stray prints of ngspice or PySpice land in the worker's log, not in the protocol
    sys.stdout = sys.stderr
    requests = sys.stdin.buffer
    try:
        from netloop.sim.session import NgspiceSession  # noqa: PLC0415
        from netloop.sim.session_job import JobFailure, JobRunner  # noqa: PLC0415

        session = NgspiceSession(argv[1])
        runner = JobRunner(session)  # keeps the last circuit loaded for the next job on it
    except BaseException as exc:  # noqa: BLE001 - reported to the parent, which decides
        write_frame(replies, ("unavailable", f"{type(exc).__name__}: {exc}"))
        return 1
    write_frame(replies, ("ready", session.version))
    warm = os.environ.get("NETLOOP_WORKER_WARM")  # netloop.sim.spawn.WARM_ENV: read while the caller reads its netlist
    if warm:
        from netloop.sim.used_models import warm as read_libraries  # noqa: PLC0415

        read_libraries(warm)
    home = os.getcwd()
    while True:
        try:
            request = read_frame(requests)
        except WorkerGone:
            return 0
        kind, job = request
        try:
            if kind != "run":
                raise ValueError(f"unknown request {kind!r}")
            os.chdir(job.workdir or home)  # ngspice reads relative .include/.lib paths from here
            try:
                payload = runner.run(job)
            finally:
                os.chdir(home)
            write_frame(replies, ("ok", payload))
        except JobFailure as failure:
            write_frame(replies, ("failed", failure.kind, failure.message, failure.output, failure.aid, failure.tried))
        except Exception as exc:  # noqa: BLE001 - a bug of ours, reported with its traceback
            write_frame(replies, ("failed", "internal", f"{type(exc).__name__}: {exc}", traceback.format_exc(), None, ()))


if __name__ == "__main__":
    sys.exit(main(sys.argv))
