"""A progress bar of a command's steps on a terminal; nothing otherwise (pipes, cron)."""

from __future__ import annotations


class Steps:
    """``with Steps(ctx.err, total=4) as steps: steps.step("reading the file")``: a rich
    progress line on stderr when it is a terminal, cleared when done; silent elsewhere."""

    def __init__(self, console, total: int):
        self.progress = None
        if console.is_terminal:
            from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

            self.progress = Progress(TextColumn("{task.description}"), BarColumn(), TimeElapsedColumn(),
                                     console=console, transient=True)
            self.task = self.progress.add_task("starting", total=total)

    def __enter__(self):
        if self.progress is not None:
            self.progress.start()
        return self

    def step(self, what: str) -> None:
        if self.progress is not None:
            self.progress.update(self.task, description=what, advance=1)

    def __exit__(self, *exc) -> None:
        if self.progress is not None:
            self.progress.stop()
