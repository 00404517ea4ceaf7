"""Progress on standard error for long jobs: a bar on a terminal, plain lines otherwise.

One class, :class:`Progress`, serves every command that may run for more than
a few seconds (the in-memory run, the baselines, the export, the report):

* the engines' protocol of ``DEVELOPERS.md`` — it is callable with the
  engine's rows: first ``{"plan": [entry, ...]}``, then one dict per finished
  stage (``stage``, ``seconds``, figures) and per round inside a stage (no
  ``seconds``); a stage ``"<start>: <step>"`` completes the plan entry
  ``<step>`` (the orders and line cuts of every start count as ``orders``);
* counted work — :meth:`Progress.task` opens a stage of ``total`` steps,
  :meth:`Progress.advance` moves it on; the estimate of the time left is the
  elapsed time per finished step times the steps left (a linear
  extrapolation, common practice for progress bars), shown once at least one
  step is done;
* free text — :meth:`Progress.line`.

On a terminal the stages get a `rich <https://rich.readthedocs.io>`_ bar
(removed when done) and every finished stage a line. When standard error is
not a terminal (logs, CI, pipes) only plain lines are written, and a counted
stage gets a line every ``LINE_EVERY`` seconds and, once it has run
``FIRST_LINE`` seconds, every 10 % of its steps.
``quiet=True`` writes nothing at all: :func:`progress_for` returns ``None``
then, which every caller accepts as "no progress".
"""

from __future__ import annotations

import time

__all__ = ["Progress", "progress_for", "LINE_EVERY", "FIRST_LINE"]

LINE_EVERY = 5.0
"""Seconds between two plain lines of one counted stage (besides every tenth of it)."""

FIRST_LINE = 2.0
"""A counted stage gets its tenth-of-the-way plain lines only once it has run this many seconds."""


def progress_for(quiet=False, console=None):
    """The progress reporter of a command: ``None`` when ``quiet``, else a :class:`Progress`.

    Parameters
    ----------
    quiet : bool
        The command's ``--quiet`` flag (absent flags count as ``False``).
    console : rich.console.Console or None
        Where to write (default: standard error).

    Returns
    -------
    Progress or None
    """
    return None if quiet else Progress(console=console)


def _eta(elapsed, done, total):
    """Seconds left by linear extrapolation, or ``None`` before the first step."""
    if not done or total is None or done >= total:
        return None
    return elapsed / done * (total - done)


def _clock(seconds):
    seconds = int(round(seconds))
    return f"{seconds // 60}:{seconds % 60:02d}" if seconds >= 60 else f"{seconds} s"


class Progress:
    """Progress reporter on standard error (see the module docstring).

    Parameters
    ----------
    console : rich.console.Console or None
        Where to write (default: a console on standard error).
    clock : callable or None
        Time source in seconds (default :func:`time.perf_counter`); tests pass
        a fake one.
    """

    def __init__(self, console=None, clock=None):
        from rich.console import Console

        self.console = console or Console(stderr=True, highlight=False)
        self.clock = clock or time.perf_counter
        self.bar = None
        self.plan = []
        self._plan_task = None
        self._task = None  # (bar task id or None, description, total, started, done, last line time, last tenth)

    # -- output --------------------------------------------------------------
    @property
    def terminal(self):
        """Whether the bar is drawn (standard error is a terminal)."""
        return bool(self.console.is_terminal)

    def line(self, text):
        """Write one line (above the bar, when there is one)."""
        console = self.bar.console if self.bar is not None else self.console
        console.print(f"[dim]shardline[/dim] {text}", markup=True, highlight=False)

    def _ensure_bar(self):
        if self.terminal and self.bar is None:
            from rich.progress import BarColumn, MofNCompleteColumn, Progress as Bar, TextColumn, \
                TimeElapsedColumn, TimeRemainingColumn

            self.bar = Bar(TextColumn("{task.description:<20}"), BarColumn(), MofNCompleteColumn(),
                           TimeElapsedColumn(), TextColumn("left"), TimeRemainingColumn(),
                           console=self.console, transient=True)
            self.bar.start()
        return self.bar

    def close(self):
        """Finish an open counted stage and remove the bar."""
        if self._task is not None:
            self.done()
        if self.bar is not None:
            self.bar.stop()
            self.bar = None

    # -- counted stages --------------------------------------------------------
    def task(self, description, total=None):
        """Open a stage of ``total`` steps (``None``: unknown); a previous one is finished first."""
        if self._task is not None:
            self.done()
        bar = self._ensure_bar()
        tid = bar.add_task(description[:20], total=total) if bar is not None else None
        now = self.clock()
        self._task = [tid, description, total, now, 0, now, 0]
        if bar is None:
            self.line(f"{description}: started" + (f" ({total:,} steps)" if total else ""))

    def advance(self, steps=1):
        """Move the open stage on by ``steps``."""
        if self._task is None:
            return
        t = self._task
        t[4] += steps
        if self.bar is not None:
            self.bar.update(t[0], completed=t[4])
            return
        now = self.clock()
        tenth = int(10 * t[4] / t[2]) if t[2] else 0
        due = now - t[5] >= LINE_EVERY or (tenth > t[6] and now - t[3] >= FIRST_LINE)
        if due and (t[2] is None or t[4] < t[2]):
            t[5], t[6] = now, tenth
            eta = _eta(now - t[3], t[4], t[2])
            of = f"/{t[2]:,} ({t[4] / t[2]:.0%})" if t[2] else ""
            left = f", about {_clock(eta)} left" if eta is not None else ""
            self.line(f"{t[1]}: {t[4]:,}{of}, {now - t[3]:.1f} s{left}")

    def done(self, text=None):
        """Finish the open stage with one line (``text`` replaces the default)."""
        if self._task is None:
            return
        tid, description, total, started, count, _, _ = self._task
        self._task = None
        if self.bar is not None and tid is not None:
            self.bar.remove_task(tid)
        steps = f"{count:,} steps, " if total else ""
        self.line(text or f"{description}: done, {steps}{self.clock() - started:.2f} s")

    # -- the engines' rows -----------------------------------------------------
    def start(self, plan):
        """Follow an engine's plan of stages."""
        self.plan = list(plan)
        bar = self._ensure_bar()
        if bar is not None and self._plan_task is None:
            self._plan_task = bar.add_task(self.plan[0] if self.plan else "", total=len(self.plan))

    def _advance_plan(self, stage):
        step = stage.rpartition(": ")[2]
        step = "orders" if step in ("order", "line cut") else step
        if self.bar is None or self._plan_task is None:
            return
        if step not in self.plan:
            self.bar.update(self._plan_task, description=stage[:20])
            return
        done = self.plan.index(step) + 1
        nxt = self.plan[done] if done < len(self.plan) else "writing"
        task = self.bar.tasks[[t.id for t in self.bar.tasks].index(self._plan_task)]
        self.bar.update(self._plan_task, completed=max(done, task.completed), description=nxt)

    def __call__(self, row):
        if "plan" in row:
            self.start(row["plan"])
            return
        if "stage" not in row or "seconds" not in row:  # a round inside a stage
            rest = "  ".join(f"{key} {value:,}" if isinstance(value, int) else f"{key} {value}"
                             for key, value in row.items() if key != "stage")
            self.line(f"  {row.get('stage', '')}: {rest}")
            return
        if "clusters" in row and "rounds" not in row:  # one hierarchy round
            self.line(f"  {row['stage']:<22} {row['seconds']:8.2f} s  clusters {row['clusters']:,}  "
                      f"edges {row['edges']:,}  ({row.get('where', 'memory')})")
            return
        extra = ""
        if "cut_after" in row:
            extra = f"  cut {row['cut_after']:.4f}" if "cut_before" not in row else \
                f"  cut {row['cut_before']:.4f} → {row['cut_after']:.4f}"
        if "rounds" in row:
            extra += f"  {row['rounds']} rounds, clusters {' → '.join(f'{c:,}' for c in row['clusters'])}"
        self.line(f"{row['stage']:<24} {row['seconds']:8.2f} s{extra}")
        self._advance_plan(str(row["stage"]))
