"""What the pipeline tells the user while it runs (the quiet default)."""

from __future__ import annotations

import contextlib


class Progress:
    """What the pipeline tells the user while it runs. This one says nothing."""

    @contextlib.contextmanager
    def stage(self, name: str, total: float | None = None, unit: str = ""):
        """A named stage of the run.

        Parameters
        ----------
        name : str
            What the stage does, as shown to the user.
        total : float, optional
            How much work the stage has, when known (steps, or ``unit``).
        unit : str, optional
            What ``total`` and the ticks count: ``"km"`` of road for the per-road stages (so the
            time left follows the road done), empty for plain steps.

        Returns
        -------
        contextlib.AbstractContextManager
            Yields a callable ``tick(n=1)`` that reports ``n`` more done; in a stage of
            steps, ``tick`` also takes ``what=`` naming the step just done.
        """
        yield lambda n=1, what=None: None

    def message(self, text: str) -> None:
        """Tell the user something outside any stage.

        Parameters
        ----------
        text : str
            The message.

        Returns
        -------
        None
        """
