"""The progress channel every long job reports through (the bakes, and the I/O steps inside them).

``progress(fraction, label)``: fraction in [0, 1], rising, ending at 1; label a few words ("level 3",
"writing"). A step of a larger job gets :func:`within`, which maps the step's 0..1 onto its share. Nothing
here prints; the CLI and the batch runner decide what to show.
"""

from __future__ import annotations

from collections.abc import Callable

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
