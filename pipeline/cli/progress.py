"""Progress of a long build: a bar on a terminal (tqdm), plain log lines otherwise, nothing
with --quiet. A callable ``(stage, i, n, label)`` for build.build."""

import sys
import time

#: what a stage counts, when not species
UNITS = {"read, check and fit": "partitions"}   # partitions.STAGE


class Progress:
    """Progress of a build: a bar on a terminal, plain log lines otherwise, nothing when quiet."""

    def __init__(self, quiet=False, stream=None, mininterval=0.1):
        self.stream = stream or sys.stderr
        self.quiet = quiet
        self.tty = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.bar = None
        self.stage = None
        self.t0 = time.monotonic()
        self.mininterval = mininterval
        self.published = False   # set the moment the new release is current

    def __call__(self, stage, i=0, n=0, label=""):
        if stage == "published":
            self.published = True
            return
        if self.quiet:
            return
        if stage != self.stage:
            self.close()
            self.stage = stage
            unit = UNITS.get(stage, "species")
            if self.tty and n:
                from tqdm import tqdm

                self.bar = tqdm(total=n, desc=stage, unit=unit, file=self.stream,
                                leave=False, dynamic_ncols=True, mininterval=self.mininterval)
            elif not self.tty:
                extra = f" ({n} {unit})" if n else (f": {label}" if label else "")
                print(f"[{time.monotonic() - self.t0:6.1f} s] {stage}{extra}", file=self.stream)
        if self.bar is not None:
            self.bar.set_postfix_str(label, refresh=False)
            self.bar.update(1)

    def close(self):
        """End the bar (idempotent)."""
        if self.bar is not None:
            self.bar.close()
            self.bar = None
