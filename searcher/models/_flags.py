"""A per-thread on/off switch with a context manager, for settings that hold within a block."""
from __future__ import annotations

import threading
from contextlib import contextmanager

__all__ = ["ThreadFlag"]


class ThreadFlag:
    """Off by default in every thread; ``with flag.on():`` turns it on in this thread only.

    Example::

        flag = ThreadFlag()
        with flag.on():
            flag.active   # True
        flag.active       # False
    """

    def __init__(self) -> None:
        self._local = threading.local()

    @property
    def active(self) -> bool:
        return getattr(self._local, "active", False)

    @contextmanager
    def on(self):
        before = self.active
        self._local.active = True
        try:
            yield
        finally:
            self._local.active = before
