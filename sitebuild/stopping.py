"""A stop asked for by a signal (Ctrl-C, SIGTERM), remembered beyond the KeyboardInterrupt.

The signal handler raises KeyboardInterrupt wherever the main thread happens to be. When that
is inside an import of a compiled module, Python turns it into an ImportError, and a library
that tries an optional import (``try: import x / except ImportError``) then carries on as if
nothing happened. The build checks this record before it touches the output folder, so a
stop that was asked for is never lost, whoever caught the exception.
"""

from __future__ import annotations

_signals: list[int] = []


def request(signum: int) -> None:
    """Record that signal ``signum`` asked this process to stop."""
    _signals.append(signum)


def requested() -> int | None:
    """Return the first stop signal received, or None."""
    return _signals[0] if _signals else None


def clear() -> None:
    """Forget earlier requests (a new command starts)."""
    _signals.clear()


def check() -> None:
    """Raise KeyboardInterrupt if a stop was asked for."""
    if _signals:
        raise KeyboardInterrupt
