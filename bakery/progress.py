"""The progress channel every long job reports through (the bakes, and the I/O steps inside them).

``progress(fraction, label)``: fraction in [0, 1], rising, ending at 1; label a few words ("level 3",
"writing"). A step of a larger job gets :func:`within`, which maps the step's 0..1 onto its share. Nothing
here prints; the CLI and the batch runner decide what to show.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator

#: ``progress(fraction, label)``: fraction in [0, 1], rising; label a few words ("level 3", "strips").
Progress = Callable[[float, str], None]


def no_progress(fraction: float, label: str) -> None:
    """The progress callback that reports nothing."""


def within(progress: Progress, start: float, end: float) -> Progress:
    """``progress`` for one step of a job: the step's fractions 0..1 land on ``start..end`` of the job's (never
    past ``end``, so rounding cannot make the next step's first fraction a step back).

    >>> seen = []
    >>> within(lambda f, w: seen.append((f, w)), 0.5, 0.9)(0.5, "writing"); seen
    [(0.7, 'writing')]
    >>> within(lambda f, w: seen.append(f), 0.3, 0.6)(1.0, "blending"); seen[-1]
    0.6
    """
    return lambda fraction, label: progress(min(end, start + (end - start) * fraction), label)


def maybe_within(progress: Progress | None, start: float, end: float) -> Progress | None:
    """:func:`within`, or None when there is no ``progress`` (so callees can skip reporting)."""
    return None if progress is None else within(progress, start, end)


def row_bands(rows: int, row_size: int, size: int) -> Iterator[tuple[int, int]]:
    """``(r0, r1)`` of the bands of whole rows a long pass over a map works in, top to bottom: each about
    ``size`` elements (texels or samples) for rows of ``row_size`` each, at least one row. A pass that reports
    does so after each band, with ``r1 / rows``.

    >>> list(row_bands(5, 10, 20))
    [(0, 2), (2, 4), (4, 5)]
    >>> list(row_bands(2, 100, 20))
    [(0, 1), (1, 2)]
    """
    step = max(1, size // max(1, row_size))
    for r0 in range(0, rows, step):
        yield r0, min(rows, r0 + step)
