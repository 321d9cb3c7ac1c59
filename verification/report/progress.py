"""A one-line terminal progress bar for studies, written to stderr.

Silent when the stream is not a terminal (logs, CI, pipes) or when asked to be
quiet, so redirected output stays clean.
"""

import sys
import time


class ProgressBar:
    """Callable as ``bar(done, total, text)``, the progress hook of studies and the suite.

    Parameters
    ----------
    stream : file, optional
        Default ``sys.stderr``.
    quiet : bool
        Never draw.
    width : int
        Characters of the bar itself.
    """

    def __init__(self, stream=None, quiet=False, width=28):
        self.stream = stream if stream is not None else sys.stderr
        isatty = getattr(self.stream, "isatty", None)
        self.enabled = not quiet and bool(isatty and isatty())
        self.width = width
        self.start = time.perf_counter()
        self._drawn = False

    def __call__(self, done, total, text=""):
        if not self.enabled:
            return
        total = max(int(total), 1)
        frac = min(max(done / total, 0.0), 1.0)
        filled = int(round(frac * self.width))
        bar = "#" * filled + "-" * (self.width - filled)
        elapsed = time.perf_counter() - self.start
        line = f"[{bar}] {done}/{total} {elapsed:6.1f}s {text}"
        self.stream.write("\r" + line[:118].ljust(118))
        self.stream.flush()
        self._drawn = True

    def close(self):
        """End the bar's line (call once before printing results)."""
        if self.enabled and self._drawn:
            self.stream.write("\r" + " " * 118 + "\r")
            self.stream.flush()
            self._drawn = False

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False
