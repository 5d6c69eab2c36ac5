"""Options and loaders the commands share."""

from __future__ import annotations

import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from ..errors import InputError

if TYPE_CHECKING:  # the commands load them when they run: --help stays light
    from ..job import Job
    from ..parts import Inventory

JobArg = Annotated[Path, typer.Argument(
    exists=True, dir_okay=False, readable=True, metavar="JOB_FILE",
    help="The job (TOML) file: one stage, or a board of [[stage]] tables.")]
BoardArg = Annotated[Path, typer.Argument(
    exists=True, dir_okay=False, readable=True, metavar="BOARD_FILE",
    help="The board (TOML) file: its [[stage]] tables with the parts fitted today.")]
InventoryOpt = Annotated[Path, typer.Option("--inventory", "-i", exists=True, dir_okay=False,
                                            readable=True, help="The stock CSV file.")]
JsonOpt = Annotated[bool, typer.Option("--json", help="Print only a JSON object on stdout.")]
ValuesOpt = Annotated[list[str], typer.Option(
    "--values", "-v", metavar="ROLE=VALUE",
    help="ROLE=VALUE_OR_PART_ID[,...]; a series pair A+B, a parallel pair "
    "A|B. Repeatable.")]
TransistorOpt = Annotated[str, typer.Option("--transistor", "-t", metavar="PART_ID",
                                            help="Stock part id of the transistor.")]
SeedOpt = Annotated[int, typer.Option("--seed", metavar="N", min=0, max=2**31 - 1,
                                      help="Monte Carlo seed, 0 to 2147483647.")]
WorkersOpt = Annotated[int, typer.Option(
    "--workers", metavar="N", min=0, max=1024,
    help="Local worker processes for Monte Carlo (0: every core; 1: this process). Short "
    "runs stay in this process; the result is the same either way.")]
ClusterOpt = Annotated[str | None, typer.Option(
    "--cluster", metavar="tcp://HOST:PORT",
    help="Run Monte Carlo on this Dask scheduler's workers (needs the cluster extra: pip "
    "install 'stockbias[cluster]').")]
#: Below this many boards Monte Carlo runs in the calling process: starting workers would
#: cost more than it saves (the result does not depend on where it runs).
PARALLEL_MIN_SAMPLES = 200_000
#: Most Monte Carlo boards one check may draw, in every command that takes --samples.  The
#: draw streams in blocks, so memory stays bounded (about 130 MB for a check of 10⁶ boards,
#: measured); time does not: about 16 s per million boards and check on one core of the
#: 2-core test machine, so the cap already allows runs of hours.
MAX_SAMPLES = 1_000_000_000


def _samples_within_cap(value: int | None) -> int | None:
    if value is not None and value > MAX_SAMPLES:
        raise InputError(f"at most {MAX_SAMPLES:,} Monte Carlo boards per check: memory "
                         "stays bounded (the boards are drawn in blocks) but time grows "
                         "with the count, about 16 s per million boards on one core, so "
                         "more would run for days", column="--samples", text=str(value))
    return value


SAMPLES_HELP = (f"Monte Carlo boards per check, 0 (none) to {MAX_SAMPLES:,} in every command; "
                "drawn in blocks in bounded memory, time grows with N (about 16 s per million "
                "boards on one core).")
SamplesOpt = Annotated[int, typer.Option(
    "--samples", metavar="N", min=0, callback=_samples_within_cap, help=SAMPLES_HELP)]
#: --samples whose default depends on the job (a yield target judges on more boards)
JobSamplesOpt = Annotated[int | None, typer.Option(
    "--samples", metavar="N", min=0, callback=_samples_within_cap,
    help=SAMPLES_HELP + " Default 2,000; with a yield target, 20,000 per judged candidate "
    "and per final check.")]
ForceOpt = Annotated[bool, typer.Option(
    "--force", help="Replace output files that exist (a symbolic link is replaced itself, "
    "never the file it points to). Inputs are never written over.")]


def plot_files(stems: tuple[str, ...]) -> list[str]:
    """The file names a --plot folder may receive for these plot stems (PNG and SVG)."""
    return [f"{stem}.{fmt}" for stem in stems for fmt in ("png", "svg")]


def load(job_path: Path, inventory_path: Path | None) -> tuple[Job, Inventory | None]:
    """Load the job and the stock file (errors become one-line messages in cli.app)."""
    from ..job import load_job
    from ..stock_io import read_inventory

    job = load_job(job_path)
    inv = read_inventory(inventory_path) if inventory_path is not None else None
    if inv is not None and job.search.model == "constant_vbe":
        from ..device_data import at_job_currents

        # rows with a model card or datasheet points: hFE and VBE at the job's currents
        # (the exponential model follows the card itself)
        inv = at_job_currents(inv, min(s.target.ic_min for s in job.stages),
                              max(s.target.ic_max for s in job.stages))
    return job, inv


@contextmanager
def search_progress(json_out: bool, label: str) -> Iterator[Callable[[str, float], None] | None]:
    """A rich progress bar on stderr for searches that run longer than a second (none with
    --json or when stderr is not a terminal); yields the callback the search takes."""
    from ..render.console import make_console

    console = make_console(stderr=True)
    if json_out or not console.is_terminal:
        yield None
        return
    from rich.progress import Progress

    bar = Progress(console=console, transient=True)
    task = bar.add_task(label, total=1.0)
    started = time.monotonic()

    def progress(stage: str, fraction: float) -> None:
        if time.monotonic() - started > 1.0 and not bar.live.is_started:
            bar.start()
        bar.update(task, completed=fraction, description=stage)

    try:
        yield progress
    finally:
        if bar.live.is_started:
            bar.stop()


def executor_for(samples: int, workers: int, cluster: str | None) -> object:
    """The executor for a run of ``samples`` Monte Carlo boards under --workers/--cluster."""
    from ..executor import InProcess, make_executor

    if cluster:
        return make_executor(cluster=cluster)
    if samples < PARALLEL_MIN_SAMPLES:
        return InProcess()
    return make_executor(workers or None)


@contextmanager
def sample_progress(json_out: bool, samples: int) -> Iterator[Callable[[int], None] | None]:
    """A progress bar on stderr counting Monte Carlo boards done (none with --json, when
    stderr is not a terminal, or for runs that finish within a second)."""
    with search_progress(json_out, f"Monte Carlo, {samples:,} boards") as bar:
        if bar is None or samples <= 0:
            yield None
            return

        def done(boards: int) -> None:
            bar(f"Monte Carlo: {boards:,} of {samples:,} boards", boards / samples)

        yield done
