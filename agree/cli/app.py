"""The Typer application and what every command shares: error handling and output."""

from __future__ import annotations

import contextlib
import json
import sys
from typing import Any, Iterable, Iterator

import typer
from rich.console import Console

from agree.core.errors import AgreeError
from agree.core.files import run_scope

app = typer.Typer(
    name="agree",
    help="Measure, diagnose, reconcile and report agreement between coders of qualitative data.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)

class _Console(Console):
    """Lines of text soft-wrap (long commands and paragraphs stay whole, to copy); tables are
    fitted to the terminal's width, wrapping their cells (with soft wrapping a table keeps its
    natural width and a narrow terminal breaks every row)."""

    def print(self, *objects: Any, **kwargs: Any) -> None:
        if "soft_wrap" not in kwargs and any(type(o).__name__ == "Table" for o in objects):
            kwargs["soft_wrap"] = False
        super().print(*objects, **kwargs)


stdout = _Console(soft_wrap=True, markup=False)  # user text (codes, [placeholders]) is never markup
stderr = _Console(stderr=True, soft_wrap=True, markup=False)

STATE = {"debug": False, "quiet": False}


@app.callback()
def _global(
    ctx: typer.Context,
    debug: bool = typer.Option(False, "--debug", help="Show the full traceback on errors."),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="Print no progress or notes on stderr."),
):
    STATE["debug"] = debug
    STATE["quiet"] = quiet
    # one run per command: every file it reads is an input that none of its outputs may replace
    ctx.with_resource(run_scope())


_BARS: list = []  # the progress bar shown, if any


@contextlib.contextmanager
def progress_bar(description: str) -> Iterator[Any]:
    """A rich progress bar on stderr; silent when stderr is not a terminal or with --quiet.

    Yields a callback(step, fraction) for the library's `progress=` argument. Inside another bar
    (reading inside a command's own bar) it is silent: one bar at a time."""
    if STATE["quiet"] or not stderr.is_terminal or _BARS:
        yield lambda step, done: None
        return
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    with Progress(TextColumn("{task.description}"), BarColumn(), TextColumn("{task.fields[step]}"),
                  TimeElapsedColumn(), console=stderr, transient=True) as bar:
        task = bar.add_task(description, total=1.0, step="")

        def update(step: str, done: float) -> None:
            bar.update(task, completed=min(max(done, 0.0), 1.0), step=step)

        _BARS.append(bar)
        try:
            yield update
        finally:
            _BARS.pop()


def scaled(tick: Any, low: float, high: float) -> Any:
    """A progress callback mapping 0..1 onto low..high of the bar."""
    return lambda step, done: tick(step, low + (high - low) * done)


def note(message: str) -> None:
    """A note for the user on stderr (what was detected, what was left out)."""
    if not STATE["quiet"]:
        stderr.print(message, highlight=False, markup=False)


def print_json(obj: Any) -> None:
    sys.stdout.write(json.dumps(obj, indent=2, ensure_ascii=False, allow_nan=False) + "\n")


DIGITS = 3          # decimals of coefficients in the terminal's tables (agree.core.format.DEFAULT_DIGITS)


def coefficient(x: Any, digits: int = DIGITS) -> str:
    """A coefficient in APA style (no leading zero), as in `agree score` and the report."""
    from agree.core.format import format_value

    return format_value(x, "coefficient", digits)


def signed(x: Any, digits: int = DIGITS) -> str:
    """A change of a coefficient with its sign (+.012, −.034), as in the report."""
    from agree.core.format import signed as format_signed

    return format_signed(x, digits)


def percent(x: Any, digits: int | None = 1) -> str:
    """A share as a percentage with one decimal, as in the report (`agree.core.format.percent_label`;
    None for as many decimals as needed, as for confidence levels: 97.5%); '–' when undefined."""
    from agree.core.format import percent_label

    return percent_label(x, digits)


def print_notes(notes: Iterable[Any]) -> None:
    """The library's typed notes, one line each on stderr."""
    for n in notes:
        note(f"note: {n.message}")


def print_summary(title: str, rows: list[tuple[str, Any]]) -> None:
    """A two-column table of counts (what, how many)."""
    from rich.table import Table

    table = Table(title=title, show_header=False)
    table.add_column("what")
    table.add_column("count", justify="right")
    for label, value in rows:
        table.add_row(label, str(value))
    stdout.print(table)


def _is(exc: BaseException, name: str) -> bool:
    """Whether `exc` is an instance of the (Typer-bundled) click exception class `name`."""
    return any(cls.__name__ == name for cls in type(exc).__mro__)


def _run(args: list[str]) -> Any:
    """Run the app on the arguments; `agree COMMAND --help` goes straight to the command.

    Through the group, Typer would first validate the group's own unset --help flag with
    pydantic, a tenth of a second spent on nothing in a help that should appear at once."""
    import typer.main

    group = typer.main.get_command(app)
    words = [a for a in args if a not in ("-q", "--quiet", "--debug")]
    if len(words) > 1 and words[0] in group.commands and "--help" in words[1:]:
        return group.commands[words[0]].main(args=words[1:], prog_name=f"agree {words[0]}",
                                             standalone_mode=False)
    return group.main(args=args, prog_name="agree", standalone_mode=False)


def main() -> None:
    """Console entry point: every error becomes one line on stderr, with exit code 2 for bad input
    or usage (unknown options, values out of range) and no traceback unless --debug."""
    from agree.cli import commands  # noqa: F401  (registers the commands)

    # --quiet and --debug are global; accept them after the command name too (agree score x.csv -q)
    args = sys.argv[1:]
    flags = [a for a in args if a in ("-q", "--quiet", "--debug")]
    args = flags + [a for a in args if a not in flags]
    try:
        code = _run(args)
        sys.exit(code if isinstance(code, int) else 0)
    except AgreeError as exc:
        if STATE["debug"]:
            raise
        stderr.print(f"error: {exc.one_line()}", highlight=False, markup=False)
        for extra in exc.problems[1:]:
            stderr.print(f"error: {extra.one_line()}", highlight=False, markup=False)
        sys.exit(2)
    except (KeyboardInterrupt, BrokenPipeError):
        sys.exit(130)
    except Exception as exc:
        if _is(exc, "NoArgsIsHelpError"):  # the help was shown
            sys.exit(0)
        if _is(exc, "Abort"):
            stderr.print("aborted", highlight=False, markup=False)
            sys.exit(1)
        if _is(exc, "ClickException"):  # usage: unknown option, missing argument, value out of range
            message = exc.format_message().rstrip(".")
            known = {c.name for c in app.registered_commands} | {c.callback.__name__ for c in app.registered_commands}
            command = next((a for a in args if not a.startswith("-")), "")
            where = f"agree {command} --help" if command in known else "agree --help"
            hint = " (a coefficient value such as 0.8, not 80)" if "'--min'" in message else ""
            stderr.print(f"error: {message}{hint}; see '{where}'", highlight=False, markup=False)
            sys.exit(getattr(exc, "exit_code", 2) or 2)
        if STATE["debug"]:
            raise
        stderr.print(f"error: {type(exc).__name__}: {exc} (run with --debug for the traceback)",
                     highlight=False, markup=False)
        sys.exit(1)
