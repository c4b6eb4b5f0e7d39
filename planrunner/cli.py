"""Command line: a thin typer layer over the Python API.

Each command parses its arguments, calls the API, prints, and maps the outcome to an exit code.
Every :class:`~planrunner.errors.PlanrunnerError` goes through :func:`_handled`, the one place
that turns errors into messages and exit codes; anything else is reported as an internal error
(exit 1) without a traceback, because tracebacks and their local variables may hold study data.

Only light modules are imported here (typer, and for the plan commands pydantic and PyYAML), so
``planrunner validate`` starts fast; numerical libraries are imported by the commands that
compute.
"""

from __future__ import annotations

import os
import sys
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Annotated, Any, Optional

import typer

from ._version import __version__
from .errors import PlanError, PlanrunnerError

app = typer.Typer(
    name="planrunner",
    help="Pre-specified comparisons of group means: validate a plan, rehearse it, run it, and "
    "leave an audit trail.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    pretty_exceptions_show_locals=False,
)

#: Where `planrunner schema` writes by default (relative to the working folder).
DEFAULT_SCHEMA_PATH = Path("schemas") / "plan.schema.json"
#: Where `planrunner new` writes by default.
DEFAULT_NEW_PATH = Path("plan.yaml")


def _err(text: str) -> None:
    typer.echo(text, err=True)


@contextmanager
def _handled() -> Iterator[None]:
    """The one error handler: PlanrunnerError -> its exit code; anything else -> exit 1."""
    try:
        yield
    except typer.Exit:
        raise
    except PlanrunnerError as exc:
        _report(exc)
        raise typer.Exit(exc.exit_code) from None
    except KeyboardInterrupt:
        _err("error: interrupted")
        raise typer.Exit(130) from None
    except Exception as exc:  # noqa: BLE001 - the last line of defence, no traceback
        _err(f"internal error: {type(exc).__name__}: {exc}")
        raise typer.Exit(1) from None


def _report(exc: PlanrunnerError) -> None:
    for problem in exc.problems:
        _err(problem)
    _err(f"error: {exc.message}")


def _version_callback(value: bool) -> None:
    if value:
        typer.echo(f"planrunner {__version__}")
        raise typer.Exit(0)


@app.callback()
def _root(
    version: Annotated[
        Optional[bool],
        typer.Option("--version", help="Show the version and exit.", is_eager=True,
                     callback=_version_callback),
    ] = None,
) -> None:
    """Pre-specified comparisons of group means."""


# ---------------------------------------------------------------------------------------------
# plan commands


@app.command()
def validate(
    plans: Annotated[list[Path], typer.Argument(help="Plan files to check.", metavar="PLAN...")],
    quiet: Annotated[
        bool, typer.Option("--quiet", "-q", help="Print only problems and warnings.")
    ] = False,
) -> None:
    """Check plan files; print fingerprints, warnings and the decision tree of each valid one.

    Exit 0 when every plan is valid, 2 otherwise.
    """
    from .plan.describe import describe_plan, render_steps
    from .plan.load import validate_plan

    failed = 0
    with _handled():
        for i, path in enumerate(plans):
            try:
                loaded = validate_plan(path)
            except PlanError as exc:  # report it and go on with the next file
                _report(exc)
                failed += 1
                continue
            plan = loaded.model
            for warning in loaded.warnings:
                _err(f"warning: {warning}")
            if quiet:
                continue
            if i:
                typer.echo("")
            typer.echo(f"{path}: valid plan '{plan.id}', revision {plan.revision}")
            typer.echo(f"  plan fingerprint:  sha256:{loaded.fingerprints.plan}")
            typer.echo(f"  file fingerprint:  sha256:{loaded.fingerprints.raw}")
            typer.echo(f"  warnings:          {len(loaded.warnings)}")
            typer.echo("  decision tree:")
            typer.echo(render_steps(describe_plan(plan), indent="    "))
    if failed:
        _err(f"{failed} of {len(plans)} plan{'s' if len(plans) != 1 else ''} invalid")
        raise typer.Exit(2)


@app.command()
def schema(
    out: Annotated[
        Path, typer.Option("--out", "-o", help="File to write; '-' prints to standard output.")
    ] = DEFAULT_SCHEMA_PATH,
) -> None:
    """Write the JSON schema of the plan format (for editor completion and checks)."""
    from .plan.model import plan_json_schema_text

    with _handled():
        text = plan_json_schema_text()
        if str(out) == "-":
            typer.echo(text, nl=False)
            return
        _write_text(out, text, replace=True)
        typer.echo(f"wrote {out}")


@app.command()
def new(
    path: Annotated[
        Path, typer.Argument(help="Where to write the starter plan.")
    ] = DEFAULT_NEW_PATH,
    force: Annotated[bool, typer.Option("--force", help="Replace an existing file.")] = False,
) -> None:
    """Write a commented starter plan: Welch's ANOVA with Games-Howell, no variance gate."""
    from .plan.load import load_plan_bytes
    from .plan.model import STARTER_PLAN

    with _handled():
        if path.exists() and not force:
            raise PlanError(
                f"{path} already exists; use --force to replace it",
                problems=[],
            )
        load_plan_bytes(STARTER_PLAN.encode("utf-8"), path=path)  # never write an invalid plan
        _write_text(path, STARTER_PLAN, replace=force)
        typer.echo(f"wrote {path}; edit it, then run: planrunner validate {path}")


# ---------------------------------------------------------------------------------------------
# run commands (thin layers over planrunner.api)


@app.command()
def run(
    plan: Annotated[Path, typer.Argument(help="The plan file to run.", metavar="PLAN")],
    data: Annotated[
        Optional[Path],
        typer.Option("--data", help="Run on this data file instead of the plan's data.file "
                     "(another batch of data)."),
    ] = None,
    out: Annotated[
        Optional[Path],
        typer.Option("--out", help="Run folder to write (default: reports/<plan id>)."),
    ] = None,
    operator: Annotated[
        Optional[str],
        typer.Option("--operator", help="Who runs the plan (default: PLANRUNNER_OPERATOR or "
                     "the login name)."),
    ] = None,
    deviation: Annotated[
        Optional[str],
        typer.Option("--deviation", help="Declare, in one line, why the plan differs from "
                     "its lock; the reason is recorded in the decision log."),
    ] = None,
    archive: Annotated[
        bool,
        typer.Option("--archive", help="Copy the plan and data into the run folder with a "
                     "checksum manifest."),
    ] = False,
) -> None:
    """Run a plan on its data; write results.json, decisions.jsonl and the resolved plan.

    Exit 0 when the plan ran to its end, 3 when the data were rejected, 4 when the plan
    stopped itself by one of its own rules, 5 when it differs from its lock.
    """
    from .api import run_plan

    with _handled():
        outcome = run_plan(plan, data=data, out=out, operator=operator, deviation=deviation,
                           archive=archive, command=["planrunner", *sys.argv[1:]])
        typer.echo(outcome.summary())
    raise typer.Exit(outcome.exit_code)


@app.command()
def lock(
    plan: Annotated[Path, typer.Argument(help="The plan file to lock.", metavar="PLAN")],
    replace: Annotated[
        bool, typer.Option("--replace", help="Replace an existing lock of a changed plan.")
    ] = False,
) -> None:
    """Write <plan>.lock.json beside the plan: its fingerprints, the time and the git commit."""
    from .api import lock_plan

    with _handled():
        outcome = lock_plan(plan, replace=replace)
        typer.echo(outcome.summary())
    raise typer.Exit(outcome.exit_code)


@app.command()
def verify(
    run_dir: Annotated[Path, typer.Argument(help="The run folder to check.", metavar="RUN_DIR")],
    rerun: Annotated[
        bool, typer.Option("--rerun/--no-rerun", help="Rerun the plan and compare results.")
    ] = True,
    expected_head: Annotated[
        Optional[str],
        typer.Option("--expected-head", help="The decision log's final chain value, kept "
                     "elsewhere when the run was made."),
    ] = None,
) -> None:
    """Check a run folder: the log's hash chain, results.json, and a byte-for-byte rerun.

    Exit 0 when every check holds, 1 when a problem was found, 2 on misuse.
    """
    from .api import verify_run

    with _handled():
        outcome = verify_run(run_dir, rerun=rerun, expected_head=expected_head)
        typer.echo(outcome.summary())
    raise typer.Exit(outcome.exit_code)


@app.command()
def report(
    run_dir: Annotated[Path, typer.Argument(help="The run folder to render.", metavar="RUN_DIR")],
    formats: Annotated[
        Optional[list[str]],
        typer.Option("--format", help="html or markdown; repeat for both (default: both)."),
    ] = None,
) -> None:
    """Rebuild report.html and report.md from a run folder (refused when verify would fail)."""
    from .report.render import render_reports

    with _handled():
        chosen = tuple(formats) if formats else ("html", "markdown")
        bad = [f for f in chosen if f not in ("html", "markdown")]
        if bad:
            raise PlanError(f"--format {bad[0]!r} is not allowed; use html or markdown",
                            problems=[])
        for path in render_reports(run_dir, formats=chosen):
            typer.echo(f"wrote {path}")


@app.command()
def rehearse(
    plan: Annotated[Path, typer.Argument(help="The plan file to rehearse.", metavar="PLAN")],
    out: Annotated[
        Optional[Path],
        typer.Option("--out", help="Folder to write (default: reports/<plan id>-rehearsal)."),
    ] = None,
    replicates: Annotated[
        Optional[int], typer.Option("--replicates", help="Replace rehearsal.replicates.")
    ] = None,
    seed: Annotated[Optional[int], typer.Option("--seed", help="Replace rehearsal.seed.")] = None,
    scenario: Annotated[
        Optional[str], typer.Option("--scenario", help="Rehearse only this scenario.")
    ] = None,
    target_power: Annotated[
        Optional[float],
        typer.Option("--target-power", help="Also find the smallest n per group whose "
                     "simulated power reaches this target for --scenario."),
    ] = None,
) -> None:
    """Simulate the plan's scenarios through its whole decision tree: paths, type-I error, power.

    Writes rehearsal.json, rehearsal.md and rehearsal.html. Exit 0 when the rehearsal ran.
    """
    from .engine.rehearse import rehearse_plan

    with _handled():
        with _progress_bar("rehearsing") as progress:
            outcome = rehearse_plan(plan, out=out, replicates=replicates, seed=seed,
                                    scenario=scenario, target_power=target_power,
                                    progress=progress)
        typer.echo(outcome.summary())
    raise typer.Exit(outcome.exit_code)


@contextmanager
def _progress_bar(label: str) -> Iterator[Any]:
    """A progress bar on standard error when it is a terminal; the callback takes (done, total).

    Yields None (no callback) when standard error is not a terminal, so logs stay clean.
    """
    if not sys.stderr.isatty():
        yield None
        return
    bar: Any = None
    shown = 0

    def progress(done: int, total: int) -> None:
        nonlocal bar, shown
        if bar is None:
            bar = typer.progressbar(length=max(int(total), 1), label=label, file=sys.stderr)
            bar.__enter__()
        if total != bar.length:  # a sample-size search may widen or shrink its bound
            bar.length = max(int(total), 1)
        step = int(done) - shown
        if step > 0:
            bar.update(step)
            shown = int(done)

    try:
        yield progress
    finally:
        if bar is not None:
            bar.__exit__(None, None, None)




def _write_text(path: Path, text: str, *, replace: bool) -> None:
    """Write under a temporary name and rename into place; no half-written files."""
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as exc:
        raise PlanError(f"cannot write {path}: {exc.strerror or exc}", problems=[]) from None
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as handle:
            handle.write(text)
        if replace:
            os.replace(tmp, path)
        else:
            _place_without_replacing(tmp, path)
    except FileExistsError:
        Path(tmp).unlink(missing_ok=True)
        raise PlanError(f"{path} already exists; use --force to replace it", problems=[]) from None
    except OSError as exc:
        Path(tmp).unlink(missing_ok=True)
        raise PlanError(f"cannot write {path}: {exc.strerror or exc}", problems=[]) from None


def _place_without_replacing(tmp: str, path: Path) -> None:
    # a hard link fails if the target appeared meanwhile: never overwrite without --force
    try:
        os.link(tmp, path)
    except FileExistsError:
        raise
    except OSError:  # no hard links on this file system
        if path.exists():
            raise FileExistsError(str(path)) from None
        os.replace(tmp, path)
        return
    os.unlink(tmp)


def main(argv: list[str] | None = None) -> None:
    """Console-script entry point (``planrunner = "planrunner.cli:main"``)."""
    args = sys.argv[1:] if argv is None else argv
    app(args=args, prog_name="planrunner")


__all__ = ["app", "main"]
