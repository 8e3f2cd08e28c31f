"""Cooperative interruption: long loops of the core ask, between units of work, whether to stop.

The core never knows why it should stop. A caller that has a budget (the web service's
compute deadline) installs a check with :func:`checking`; the core calls :func:`checkpoint`
between chunks of a batch, between series fitted one by one and between the phases of one
fit. The check raises the caller's own exception, which the core lets through like any
other. Stopping there, rather than wherever a signal lands, never interrupts compiled code
(numba) in the middle of a call into Python, where an exception cannot be propagated.

The check is held in a :class:`contextvars.ContextVar`, so it belongs to one request's
context; without one installed, :func:`checkpoint` does nothing.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager
from contextvars import ContextVar

_CHECK: ContextVar[Callable[[], None] | None] = ContextVar("curvewise_checkpoint", default=None)


def checkpoint() -> None:
    """Run the installed check, if any (it raises to stop the work)."""
    check = _CHECK.get()
    if check is not None:
        check()


@contextmanager
def checking(check: Callable[[], None]) -> Iterator[None]:
    """Install ``check`` for the work done inside the ``with`` block (this context only).

    Parameters
    ----------
    check : callable
        Called with no arguments at every :func:`checkpoint`; raises to stop the work.
    """
    token = _CHECK.set(check)
    try:
        yield
    finally:
        _CHECK.reset(token)


def install(check: Callable[[], None] | None) -> Callable[[], None] | None:
    """Install ``check`` (None: remove it) for work that spans more than one block (a WSGI
    body iterated after the call returned); returns the check it replaced, for
    :func:`restore`."""
    previous = _CHECK.get()
    _CHECK.set(check)
    return previous


def restore(previous: Callable[[], None] | None) -> None:
    """Put back the check that :func:`install` replaced."""
    _CHECK.set(previous)
