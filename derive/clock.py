"""The phase clock: where the time of one derivation goes.

A :class:`Clock` splits elapsed wall-clock and process CPU time into the phases of
:data:`PHASES`. Phases nest; time is charged to the innermost open phase only (exclusive
time), so the phases' times add up to the time spent inside any phase. The clock of the
running derivation is found through :func:`phase` (a context variable, set by
:func:`running`); with no clock running, :func:`phase` costs one lookup and records nothing.

Who marks what: ``startup`` (importing the pipeline and the libraries it loads: sympy,
python-flint, lark), ``parse`` (sheet text to the validated circuit, in :func:`derive.derive_text`),
``forms`` (a request's handler: exact forms and derivation steps, :func:`derive.analyses.run.run`),
``solve`` (determinants, :meth:`derive.solver.cramer.Solver.det`), ``verification``
(independent checks of step equations, :mod:`derive.derivation.steps` and
:mod:`derive.derivation.nodal_steps`), ``frequency`` (the frequency annotation) and
``export`` (a record written out, :func:`derive.export.formats.render`).

>>> c = Clock()
>>> with running(c):
...     with phase("forms"):
...         with phase("solve"):
...             pass
>>> sorted(k for k, v in c.wall.items() if v > 0) == ["forms", "solve"]
True
"""
from __future__ import annotations

import contextlib
import contextvars
import time

PHASES = ("startup", "parse", "solve", "forms", "verification", "frequency", "export")


class Clock:
    """Exclusive wall-clock (``wall``) and CPU (``cpu``) seconds per phase."""

    def __init__(self):
        self.wall = {p: 0.0 for p in PHASES}
        self.cpu = {p: 0.0 for p in PHASES}
        self._stack: list = []
        self._mark = (0.0, 0.0)

    def _charge(self):
        w, c = time.perf_counter(), time.process_time()
        if self._stack:
            top = self._stack[-1]
            self.wall[top] += w - self._mark[0]
            self.cpu[top] += c - self._mark[1]
        self._mark = (w, c)

    @contextlib.contextmanager
    def phase(self, name: str):
        if name not in self.wall:
            raise ValueError(f"unknown phase {name!r}")
        self._charge()
        self._stack.append(name)
        try:
            yield self
        finally:
            self._charge()
            self._stack.pop()

    def total(self, cpu: bool = False) -> float:
        return sum((self.cpu if cpu else self.wall).values())

    def shares(self) -> dict:
        """Each phase's share of the total wall-clock time (0..1)."""
        t = self.total()
        return {p: (v / t if t > 0 else 0.0) for p, v in self.wall.items()}

    def line(self) -> str:
        """One line for ``--profile``: every phase's wall and CPU seconds and share."""
        sh = self.shares()
        parts = [f"{p} {self.wall[p]:.3f}s/{self.cpu[p]:.3f}cpu {100 * sh[p]:.0f}%"
                 for p in PHASES]
        return (f"derive: phases (wall/cpu, share of {self.total():.3f}s): "
                + ", ".join(parts))

    def as_dict(self) -> dict:
        return {p: {"wall": self.wall[p], "cpu": self.cpu[p]} for p in PHASES}


_current: contextvars.ContextVar = contextvars.ContextVar("derive_clock", default=None)


@contextlib.contextmanager
def running(clock: Clock | None):
    """Make ``clock`` the clock that :func:`phase` charges, inside the block."""
    if clock is None:
        yield None
        return
    token = _current.set(clock)
    try:
        yield clock
    finally:
        _current.reset(token)


@contextlib.contextmanager
def phase(name: str):
    """Charge the enclosed time to phase ``name`` of the running clock (if any)."""
    clock = _current.get()
    if clock is None:
        yield None
        return
    with clock.phase(name):
        yield clock


def timed(name: str):
    """Decorator: every call of the function is charged to phase ``name``."""
    def wrap(fn):
        import functools

        @functools.wraps(fn)
        def inner(*a, **kw):
            clock = _current.get()
            if clock is None:
                return fn(*a, **kw)
            with clock.phase(name):
                return fn(*a, **kw)
        return inner
    return wrap
