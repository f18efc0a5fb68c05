"""The one progress bar: tqdm on stderr, or a silent stand-in when nobody is watching.

Long runs (sampler sweeps, belief propagation sweeps, simulated cohorts, bootstrap draws) report
progress on stderr only, so standard output stays clean for ``--json`` and pipes.
"""
from __future__ import annotations

import sys


class _Silent:
    """A bar that shows nothing (stderr is not a terminal, or progress was not asked for)."""

    def update(self, n=1):
        pass

    def set_postfix(self, **kwargs):
        pass

    def close(self):
        pass


SILENT = _Silent()


def progress_bar(progress, total: int, *, desc: str, unit: str, delay: float = 0.0):
    """A bar counting ``total`` ``unit``\\ s on stderr.

    ``progress``: True shows it, False hides it, None shows it only when stderr is a terminal; an
    object with ``update`` (a bar the caller owns) is returned as it is. The bar appears after
    ``delay`` seconds and is removed when closed.
    """
    if hasattr(progress, "update"):
        return progress
    if progress is None:
        progress = sys.stderr.isatty()
    if not progress:
        return SILENT
    from tqdm import tqdm
    return tqdm(total=total, desc=desc, unit=unit, file=sys.stderr, delay=delay, leave=False)
