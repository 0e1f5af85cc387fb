"""What the pipeline tells the user while it runs (the quiet default)."""

from __future__ import annotations

import contextlib


class Progress:
    """What the pipeline tells the user while it runs. This one says nothing."""

    @contextlib.contextmanager
    def stage(self, name: str, total: int | None = None):
        """A named stage of the run.

        Parameters
        ----------
        name : str
            What the stage does, as shown to the user.
        total : int, optional
            How many steps the stage has, when known.

        Returns
        -------
        contextlib.AbstractContextManager
            Yields a callable ``tick(n=1)`` that reports ``n`` more steps done.
        """
        yield lambda n=1: None

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
