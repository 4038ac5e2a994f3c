"""A progress line on stderr for long runs (large circuits).

Shown only when stderr is a terminal (or ``FAULTFIND_PROGRESS=1``) and the
circuit is large enough for a run to take more than a moment; never on
stdout, so ``--json`` output stays clean.  ``FAULTFIND_PROGRESS=0`` turns it off.
"""

from __future__ import annotations

import os
import sys
import time

__all__ = ["progress_for", "LARGE_CIRCUIT", "LARGE_FILE"]

#: Parts from which a diagnosis shows its progress.
LARGE_CIRCUIT = 1000
#: Circuit files from this size (bytes, about 10,000 parts) show their reading.
LARGE_FILE = 1_000_000


class _Line:
    def __init__(self, stream):
        self.stream = stream
        self.t0 = time.perf_counter()
        self.last = None

    def __call__(self, stage, done=None, total=None):
        if stage == "done":
            self.stream.write(f"\rfaultfind: done in {time.perf_counter() - self.t0:.1f} s"
                              + " " * 30 + "\n")
            self.stream.flush()
            return
        text = f"faultfind: {stage}"
        if done is not None and total:
            text += f" {done}/{total} parts"
        text += f" ({time.perf_counter() - self.t0:.1f} s)"
        self.stream.write("\r" + text.ljust(60))
        self.stream.flush()
        self.last = text


def progress_for(circuit=None, stream=None, *, path=None):
    """A ``progress(stage, done, total)`` callable, or None when not wanted.

    Wanted for a ``circuit`` of at least :data:`LARGE_CIRCUIT` parts, or a
    circuit file at ``path`` of at least :data:`LARGE_FILE` bytes.
    """
    stream = stream or sys.stderr
    env = os.environ.get("FAULTFIND_PROGRESS")
    if env == "0":
        return None
    if env != "1" and not (hasattr(stream, "isatty") and stream.isatty()):
        return None
    if env != "1":
        big = circuit is not None and len(circuit.parts) >= LARGE_CIRCUIT
        try:
            big = big or (path is not None and os.path.getsize(path) >= LARGE_FILE)
        except OSError:
            pass
        if not big:
            return None
    return _Line(stream)
