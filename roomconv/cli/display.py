"""Progress and tables on the terminal, drawn with ``rich``: a bar on stderr that clears
itself (nothing when stderr is not a terminal or with ``--quiet``), and plain tables on
stdout."""

from __future__ import annotations

import sys
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from typing import Any

__all__ = ["progress_bar", "BatchView", "print_table"]

#: Width of tables written to a file or pipe (a terminal uses its own width).
PIPE_WIDTH = 160


def _stderr_console():
    from rich.console import Console

    return Console(file=sys.stderr)


@contextmanager
def progress_bar(label: str, *, quiet: bool = False) -> Iterator:
    """Yields a :class:`~roomconv.jobs.progress.ProgressCallback` that draws one bar.

    Messages the job sends are printed above the bar as ``roomconv: <message>``.
    """
    from rich.progress import (
        BarColumn,
        Progress,
        TaskProgressColumn,
        TextColumn,
        TimeRemainingColumn,
    )

    console = _stderr_console()
    live = console.is_terminal and not quiet
    with Progress(
        TextColumn("{task.description}"),
        BarColumn(),
        TaskProgressColumn(),
        TimeRemainingColumn(),
        console=console,
        transient=True,
        disable=not live,
    ) as bar:
        task = bar.add_task(label, total=1.0)

        def update(stage: str, fraction: float, message: str | None = None) -> None:
            bar.update(
                task,
                completed=max(0.0, min(1.0, fraction)),
                description=f"{label} · {stage}" if stage else label,
            )
            if message:
                if live:
                    bar.console.print(
                        f"roomconv: {message}", markup=False, highlight=False, soft_wrap=True
                    )
                else:
                    print(f"roomconv: {message}", file=sys.stderr)

        yield update


class BatchView:
    """The batch on stderr: an overall bar, one bar per running job, and one line per job
    when it ends (``[k/n] rendered|skipped|failed name: reason``)."""

    def __init__(self, total: int, *, quiet: bool = False):
        from rich.progress import BarColumn, Progress, TaskProgressColumn, TextColumn

        self.console = _stderr_console()
        self.live = self.console.is_terminal and not quiet
        self.total, self.finished = total, 0
        self.bars = Progress(
            TextColumn("{task.description}"),
            BarColumn(),
            TaskProgressColumn(),
            console=self.console,
            transient=True,
            disable=not self.live,
        )
        self.overall = self.bars.add_task(f"all jobs (0/{total})", total=max(total, 1))
        self.tasks: dict[str, Any] = {}

    def __enter__(self) -> BatchView:
        self.bars.start()
        return self

    def __exit__(self, *exc) -> None:
        self.bars.stop()

    def __call__(self, kind: str, payload) -> None:
        if kind == "start":
            self.tasks[payload.name] = self.bars.add_task(f"  {payload.name[:48]}", total=1.0)
        elif kind == "progress":
            name, frac = payload
            if name in self.tasks:
                self.bars.update(self.tasks[name], completed=frac)
        elif kind in ("done", "skip"):
            self.finished += 1
            task = self.tasks.pop(payload.job.name, None)
            if task is not None:
                self.bars.remove_task(task)
            word = {"done": "rendered", "skipped": "skipped", "failed": "failed"}[payload.status]
            line = f"[{self.finished}/{self.total}] {word} {payload.job.name}"
            if payload.message:
                line += f": {payload.message}"
            self.bars.update(
                self.overall,
                completed=self.finished,
                description=f"all jobs ({self.finished}/{self.total})",
            )
            if self.live:
                self.bars.console.print(line, markup=False, highlight=False, soft_wrap=True)
            else:
                print(line, file=sys.stderr)


def print_table(
    headers: Sequence[str],
    rows: Sequence[Sequence[str]],
    *,
    title: str | None = None,
    right: Sequence[int] = (),
) -> None:
    """A table on stdout; columns whose index is in ``right`` are right-aligned."""
    from rich import box
    from rich.console import Console
    from rich.table import Table

    console = Console(file=sys.stdout)
    if not console.is_terminal:
        console = Console(file=sys.stdout, width=PIPE_WIDTH, no_color=True)
    t = Table(
        title=title,
        box=box.SIMPLE_HEAD,
        title_justify="left",
        highlight=False,
        pad_edge=False,
        show_edge=False,
    )
    for k, h in enumerate(headers):
        t.add_column(h, justify="right" if k in right else "left", no_wrap=True)
    for r in rows:
        t.add_row(*[str(c) for c in r])
    console.print(t)
