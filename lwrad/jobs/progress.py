"""Progress reporting of a run: a tqdm bar on a terminal, plain log lines otherwise.

``quiet`` silences both (batch logs then hold only the start and end lines
the runner prints unless quiet, and errors).
"""

from __future__ import annotations

import sys
import time

from lwrad.jobs.planning import format_seconds

__all__ = ["Progress"]


class Progress:
    """Pixels done, rate and time left.

    Parameters
    ----------
    total : int
        Pixels to compute in this run (pixels already in a resumed checkpoint
        are given as ``initial``).
    initial : int
        Pixels already done.
    n_chunks : int
        Chunks in the whole plan, for the log lines.
    quiet : bool
        No output at all.
    stream : file, optional
        Where to write; default ``sys.stderr``.
    """

    def __init__(
        self,
        total: int,
        *,
        initial: int = 0,
        n_chunks: int = 0,
        chunks_done: int = 0,
        quiet=False,
        stream=None,
    ):
        self.stream = sys.stderr if stream is None else stream
        self.total = int(total)
        self.done = int(initial)
        self.n_chunks = int(n_chunks)
        self.chunks_done = int(chunks_done)
        self.quiet = quiet
        self._start = time.monotonic()
        self._new = 0
        self._bar = None
        interactive = hasattr(self.stream, "isatty") and self.stream.isatty()
        if not quiet and interactive:
            from tqdm import tqdm

            self._bar = tqdm(
                total=self.total,
                initial=self.done,
                unit="px",
                file=self.stream,
                dynamic_ncols=True,
                smoothing=0.1,
                desc="lwrad run",
            )

    def update(self, chunk) -> None:
        """Record one finished chunk (a :class:`~lwrad.jobs.tasks.Chunk`)."""
        n = chunk.n_pixels
        self.done += n
        self._new += n
        self.chunks_done += 1
        if self.quiet:
            return
        if self._bar is not None:
            self._bar.update(n)
            return
        elapsed = time.monotonic() - self._start
        rate = self._new / elapsed if elapsed > 0 else float("nan")
        left = (self.total - self.done) / rate if rate and rate > 0 else None
        print(
            f"lwrad run: chunk {self.chunks_done}/{self.n_chunks} done ({chunk.key}, pixels "
            f"{chunk.start}-{chunk.stop - 1}); {self.done}/{self.total} pixels, {rate:.3g} px/s, "
            f"{format_seconds(left)} left",
            file=self.stream,
            flush=True,
        )

    def close(self) -> None:
        if self._bar is not None:
            self._bar.close()
            self._bar = None
