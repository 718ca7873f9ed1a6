"""When an update computes: now, a few milliseconds later (coalesced), or in a worker thread.

- A change made by code (a notebook cell, a plain script, a test: no running loop, or a
  kernel executing a cell) computes before it returns.
- A change from the front end (a widget event handled inside the kernel's event loop)
  computes as soon as the event handler returns when the workbench has been idle for
  :data:`COALESCE_SECONDS` (a lone click or keystroke waits for nothing); one arriving sooner
  after the last update (the next events of a slider drag, queued while it computed) is
  deferred until that much time has passed, and changes arriving meanwhile are coalesced
  (the latest settings win).  Changes made in one event handler always make one update.
- A deferred update whose cost model expects more than :data:`BACKGROUND_SECONDS` runs in a
  worker thread, so the kernel keeps handling widget messages (the Cancel button, further
  changes).  Its progress comes back to the event loop thread; a newer change or Cancel
  stops it at the engine's next block (:class:`specbench.Cancelled`) and the last good
  result stays on screen.
"""

from __future__ import annotations

import asyncio
import logging
import threading
import time
from collections.abc import Callable
from typing import Any

__all__ = ["Scheduler", "CancelFlag", "COALESCE_SECONDS", "BACKGROUND_SECONDS", "executing_a_cell",
           "running_loop"]

_log = logging.getLogger("specbench.widgets")

#: least time between the end of one front-end update and the start of the next; changes
#: arriving meanwhile are coalesced
COALESCE_SECONDS = 0.02
#: expected compute time above which a deferred update runs in a worker thread
BACKGROUND_SECONDS = 0.5


def executing_a_cell() -> bool:
    """True while a kernel runs a cell: a control changed by code, not by a front-end event.

    ipykernel records the request it is handling; a widget event from the browser is a
    ``comm_msg``, code in a cell an ``execute_request``.
    """
    try:
        from IPython import get_ipython
    except ImportError:
        return False
    kernel = getattr(get_ipython(), "kernel", None)
    if kernel is None or not hasattr(kernel, "get_parent"):
        return False
    try:
        parent = kernel.get_parent("shell") or {}
    except Exception:  # an older or unusual kernel: treat the change as an event
        return False
    return parent.get("header", {}).get("msg_type") == "execute_request"


def running_loop() -> asyncio.AbstractEventLoop | None:
    try:
        return asyncio.get_running_loop()
    except RuntimeError:
        return None


class CancelFlag:
    """A cancel request shared with a worker: the engine's token when it has one."""

    def __init__(self) -> None:
        token_cls = _engine_token()
        self.token = token_cls() if token_cls is not None else None
        self._set = False

    def cancel(self) -> None:
        self._set = True
        if self.token is not None:
            self.token.cancel()

    @property
    def cancelled(self) -> bool:
        return self._set


def _engine_token():
    from ..estimators._engine import CancelToken

    return CancelToken


class Scheduler:
    """Runs ``run(sync)`` now or deferred, and jobs in a worker thread when they are long.

    ``run(sync: bool)`` is the workbench's update; it calls :meth:`start` with a job it
    wants computed in the background.
    """

    def __init__(self, run: Callable[..., None]) -> None:
        self._run = run
        self._handle: asyncio.Handle | None = None
        self._last_end = -float("inf")  # when the last deferred update ended (perf_counter)
        self._loop: asyncio.AbstractEventLoop | None = None
        self.worker: threading.Thread | None = None
        self.job: Any = None
        self.flag: CancelFlag | None = None
        self.progress = 0.0
        self.started = 0.0
        self.rerun = False

    # ------------------------------------------------------------------ requests
    def request(self) -> None:
        """A control changed: compute now (code) or soon (front-end event)."""
        loop = running_loop()
        if loop is None or executing_a_cell():
            self.settle()
            self._run(True)
            return
        self._loop = loop
        if self.busy:
            # a newer setting supersedes the running computation
            self.rerun = True
            self.flag.cancel()
            return
        if self._handle is None:
            wait = COALESCE_SECONDS - (time.perf_counter() - self._last_end)
            # idle long enough: right after this handler (and any change it makes) returns
            self._handle = loop.call_later(wait, self._deferred) if wait > 0 else loop.call_soon(self._deferred)

    def _deferred(self) -> None:
        self._handle = None
        try:
            self._run()
        finally:
            self._last_end = time.perf_counter()

    def pending(self) -> bool:
        return self._handle is not None

    def cancel_pending(self) -> None:
        if self._handle is not None:
            self._handle.cancel()
            self._handle = None

    def flush(self) -> None:
        """Compute a deferred update now (and wait for a running one)."""
        if self.busy:
            self.worker.join()
            self._drain(self.job)
        if self._handle is not None:
            self.cancel_pending()
            self._run(True)

    def settle(self) -> None:
        """Before a synchronous update: no deferred update, no worker left running."""
        self.cancel_pending()
        if self.busy:
            self.rerun = False
            self.flag.cancel()
            self.worker.join()
            self._drain(self.job)

    # ------------------------------------------------------------------ background
    @property
    def busy(self) -> bool:
        return self.worker is not None and self.worker.is_alive()

    def background_allowed(self) -> bool:
        return running_loop() is not None and not executing_a_cell()

    def start(self, job: Any, on_progress: Callable[[float], None], on_done: Callable[[Any, bool], None]) -> None:
        """Execute ``job`` in a worker thread; ``on_done(job, rerun)`` runs on the loop thread."""
        loop = running_loop()
        self._loop = loop
        self.job = job
        self.flag = flag = CancelFlag()
        self.progress = 0.0
        self.started = time.perf_counter()
        self.rerun = False
        self._on_done = on_done

        def progress(fraction: float) -> None:
            self.progress = fraction
            if flag.cancelled:
                from ._session import CANCELLED

                raise CANCELLED("The computation was cancelled.")
            loop.call_soon_threadsafe(on_progress, fraction)

        def work() -> None:
            try:
                job.execute(progress=progress, cancel=flag.token)
            except BaseException:  # noqa: BLE001 - reported on the loop thread
                _log.exception("Workbench: the worker failed")
            if flag.cancelled:
                job.cancelled = True
            loop.call_soon_threadsafe(self._drain, job)

        self.worker = threading.Thread(target=work, name="specbench-workbench", daemon=True)
        self.worker.start()

    def _drain(self, job: Any) -> None:
        """The worker of ``job`` finished: hand the job over (once)."""
        if job is None or job is not self.job:
            return
        self.job = None
        self.worker = None
        rerun, self.rerun = self.rerun, False
        self._on_done(job, rerun)

    def cancel(self) -> bool:
        """Stop the running computation (True when one was running)."""
        if not self.busy:
            return False
        self.rerun = False
        self.flag.cancel()
        return True

    def remaining(self, expected: float) -> float | None:
        """Seconds left: from the progress so far, else from the cost model."""
        elapsed = time.perf_counter() - self.started
        if self.progress > 0.02:
            return max(0.0, elapsed * (1 - self.progress) / self.progress)
        if expected > 0:
            return max(0.0, expected - elapsed)
        return None
