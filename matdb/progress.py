"""Progress bars on stderr for long CLI computations (tqdm).

:func:`progress_bar` yields a callback ``progress(fraction_done, text)`` that library
functions accept. The bar is drawn on stderr only when stderr is a terminal, ``quiet`` is
false and the computation has run for more than :data:`DELAY_S` seconds (tqdm's
``delay``), so short runs, pipes and scripts see nothing.
"""

from __future__ import annotations

import sys
from contextlib import contextmanager
from typing import Callable, Iterator

DELAY_S = 0.5  # a bar appears only for computations longer than this [s]
STEPS = 1000  # resolution of the bar

ProgressFn = Callable[[float, str], None]


def _noop(fraction: float, text: str = "") -> None:
    return None


def wanted(quiet: bool = False, stream=None) -> bool:
    """Draw a bar? Not when ``quiet`` or when ``stream`` (default stderr) is not a terminal."""
    stream = sys.stderr if stream is None else stream
    if quiet:
        return False
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


@contextmanager
def progress_bar(label: str, quiet: bool = False, stream=None, force: bool = False) -> Iterator[ProgressFn]:
    """A ``progress(fraction_done, text)`` callback drawing a tqdm bar on ``stream``.

    ``force`` draws even when the stream is not a terminal (tests)."""
    stream = sys.stderr if stream is None else stream
    if not (force or wanted(quiet, stream)):
        yield _noop
        return
    from tqdm import tqdm

    bar = tqdm(total=STEPS, desc=label, file=stream, delay=0 if force else DELAY_S, leave=False,
               bar_format="{desc}: {percentage:3.0f}%|{bar}| {elapsed} {postfix}")
    state = {"n": 0}

    def update(fraction: float, text: str = "") -> None:
        n = int(round(min(max(float(fraction), 0.0), 1.0) * STEPS))
        if n > state["n"]:
            bar.update(n - state["n"])
            state["n"] = n
        if text:
            bar.set_postfix_str(text, refresh=False)

    try:
        yield update
    finally:
        bar.close()
