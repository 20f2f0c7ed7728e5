"""A local worker process of the ensemble engine: ``python -m boxchem.analysis.worker RFD WFD PPID``.

Reads pickled :class:`~boxchem.analysis.batches.BatchTask` objects from file
descriptor RFD, runs each with :func:`~boxchem.analysis.batches.run_batch`
(setups stay cached between batches) and writes the pickled output to WFD.
It dies with its parent: ``PR_SET_PDEATHSIG`` on Linux, and a watchdog
thread that checks the parent's pid every WATCHDOG_S seconds everywhere.
SIGINT is ignored (the parent handles Ctrl-C and stops its workers).
"""
from __future__ import annotations

import os
import pickle
import signal
import sys
import threading
import time

#: how often the watchdog checks that the parent is alive [s]
WATCHDOG_S = 0.5


def _die_with_parent(parent_pid: int) -> None:
    if sys.platform.startswith("linux"):
        try:
            import ctypes
            libc = ctypes.CDLL(None, use_errno=True)
            PR_SET_PDEATHSIG = 1
            libc.prctl(PR_SET_PDEATHSIG, signal.SIGKILL)
        except (OSError, AttributeError):
            pass
    if os.getppid() != parent_pid:     # the parent died before prctl took effect
        os._exit(1)

    def watch() -> None:
        while True:
            time.sleep(WATCHDOG_S)
            if os.getppid() != parent_pid:
                os._exit(1)
    threading.Thread(target=watch, name="boxchem-parent-watchdog", daemon=True).start()


def main(argv: list[str]) -> int:
    read_fd, write_fd, parent_pid = int(argv[0]), int(argv[1]), int(argv[2])
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    _die_with_parent(parent_pid)
    from multiprocessing.connection import Connection
    from .batches import run_batch
    recv = Connection(read_fd, writable=False)
    send = Connection(write_fd, readable=False)
    while True:
        try:
            data = recv.recv_bytes()
        except (EOFError, OSError):
            return 0          # the parent closed the pipe: done
        task = pickle.loads(data)
        out = run_batch(task)
        send.send_bytes(pickle.dumps(out, protocol=pickle.HIGHEST_PROTOCOL))


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
