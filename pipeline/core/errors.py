"""Errors that end a run with exit code 2 and a one-line reason.

A file-level fault (missing file, unreadable format, missing column, bad value,
unknown CRS, unknown config key) stops the run: the message names the file, the
row or column, and what to fix. Per-road faults never raise; the road is skipped
with a reason instead (see :mod:`pipeline.runner`).
"""

from __future__ import annotations


class InputError(Exception):
    """Unusable input. ``str(err)`` is a single line meant for the user."""

    def __init__(self, message: str):
        # Keep the message on one line whatever the caller passed.
        super().__init__(" ".join(str(message).split()))
