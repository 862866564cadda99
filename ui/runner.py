"""Background solves of one session: the worker thread, Cancel, interim plans, progress.

:class:`Runner` starts :meth:`ui.store.Store.rerun` on a worker thread; progress, each
better plan and the result come back through ``schedule`` (the app passes the session
document's next-tick callback), so the page stays responsive and Cancel works. It sets
the run's parameters of the :class:`~ui.state.SessionState`: ``running``, ``elapsed``,
``progress``, the message and ``runs_finished`` (the counter browser tests wait on).
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable

from .state import SessionState
from .store import Store, StoreError
from .text import share_text, status_text

__all__ = ["Runner", "round_text", "result_text"]

Schedule = Callable[[Callable[[], None]], None]


def _now() -> float:
    return time.monotonic()


class Runner:
    """Owns a session's solves: at most one at a time, on a worker thread."""

    def __init__(self, store: Store, state: SessionState,
                 schedule: Schedule | None = None) -> None:
        self.store = store
        self.state = state
        self.schedule: Schedule = schedule or (lambda fn: fn())
        self._cancel = threading.Event()
        self._worker: threading.Thread | None = None
        self._interim_guard = threading.Lock()
        self._interim_pending = False
        self._started = 0.0

    def start(self) -> None:
        """Solve on a worker thread; progress and the result come back through schedule."""
        if self.state.running:
            return
        self._cancel.clear()
        self._started = _now()
        self.state.param.update(running=True, elapsed=0.0, progress="Starting the solver...",
                                message="")
        self._worker = threading.Thread(target=self._work, name="districting-rerun",
                                        daemon=True)
        self._worker.start()

    def cancel(self) -> None:
        if self.state.running:
            self._cancel.set()
            self.state.progress = "Cancelling: keeping the best plan found so far..."

    def tick(self) -> None:
        """Refresh the elapsed time while a run is going (the app calls this twice a second)."""
        if self.state.running:
            self.state.elapsed = _now() - self._started

    def wait(self, timeout: float | None = None) -> None:
        """Block until the worker finished (for tests and scripts without an event loop)."""
        if self._worker is not None:
            self._worker.join(timeout)

    # ------------------------------------------------------------------ on the worker
    def _work(self) -> None:
        try:
            out = self.store.rerun(progress=self._on_round, cancel=self._cancel.is_set,
                                   on_plan=self._on_plan)
        except StoreError as exc:
            text = str(exc)
            self.schedule(lambda: self._finish(None, text))
        except Exception as exc:  # noqa: BLE001 - shown in words; the page must not die
            text = (f"The solver stopped with an unexpected error: {type(exc).__name__}: {exc}."
                    " Your edits are kept; change a setting or press Rerun again.")
            self.schedule(lambda: self._finish(None, text))
        else:
            self.schedule(lambda: self._finish(out, ""))

    def _on_round(self, rnd) -> None:
        text = round_text(rnd)
        self.schedule(lambda: self._show_progress(text, rnd.seconds))

    def _on_plan(self, out) -> None:
        """A better valid plan while the solve goes on: the store already holds it; the
        page redraws once per batch (several plans may arrive before the redraw runs)."""
        with self._interim_guard:
            if self._interim_pending:
                return
            self._interim_pending = True
        self.schedule(self._show_interim)

    # ------------------------------------------------------------------ on the page's loop
    def _show_interim(self) -> None:
        with self._interim_guard:
            self._interim_pending = False
        if self.state.running:
            self.state.plan_version += 1

    def _show_progress(self, text: str, seconds: float) -> None:
        state = self.state
        if state.running:
            state.param.update(progress=text, elapsed=max(state.elapsed, seconds))

    def _finish(self, out, error: str) -> None:
        state = self.state
        state.param.update(running=False, elapsed=_now() - self._started,
                           runs_finished=state.runs_finished + 1,
                           store_problem=self.store.problem)
        if out is None:
            state.param.update(progress="", message=error, message_kind="danger")
            return
        progress, message, kind = result_text(out, self.store.summary(out), state.elapsed)
        state.progress = progress
        state.param.update(message=message, message_kind=kind)
        state.plan_version += 1


def result_text(out, s: dict, elapsed: float) -> tuple[str, str, str]:
    """The progress line, the message and its kind for a finished run's outcome."""
    plan = out.plan
    words = status_text(plan)
    head = f"{words[0].upper()}{words[1:]}."
    progress = (f"Done in {elapsed:.1f} s. {s['students_moved']:,.0f} students "
                f"change school; mean trip {s['mean_km']:.2f} km.")
    kind = "success" if plan.status == "optimal" else "warning"
    oob = s["schools_out_of_band"]
    extra = f" {oob} school(s) outside the utilization band." if oob else ""
    return progress, head + extra, kind


def round_text(rnd) -> str:
    """One line of progress while the solver works (no solver words: the round number,
    cuts and bound stay in the log)."""
    if not rnd.objective < float("inf"):
        return f"Still solving ({rnd.seconds:.0f} s): no valid plan yet"
    close = (f"within {share_text(rnd.gap)} of the best possible" if rnd.gap < float("inf")
             else "how close to the best is not known yet")
    return (f"Still solving ({rnd.seconds:.0f} s): the best plan so far is on the map, "
            f"{rnd.objective / 1000.0:,.0f} student-km of travel, {close}")
