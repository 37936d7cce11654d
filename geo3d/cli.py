"""The ``geo3d`` command line: a thin layer over the library.

One click group, one function per command. Every command is wrapped in :func:`handle_errors`,
so bad input prints a one-line (or one-line-per-problem) message and exits with code 2, never
a traceback; ``-v`` shows the traceback of unexpected failures. Heavy imports stay inside the
commands so that ``geo3d --help`` is fast.

To add a command::

    @main.command()
    @click.argument("site", type=SITE_PATH)
    @handle_errors
    def mycommand(site):
        from geo3d.something import work

        work(site)
"""

from __future__ import annotations

import contextlib
import functools
import logging
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, TypeVar

import click

from geo3d import __version__
from geo3d.errors import Geo3dError

if TYPE_CHECKING:
    from rich.progress import Progress

__all__ = ["main", "handle_errors", "console", "error_console", "SITE_PATH", "EXIT_INPUT"]

#: Exit code for bad input (a Geo3dError).
EXIT_INPUT = 2
#: Exit code for an unexpected failure.
EXIT_FAILURE = 1

#: A site folder argument.
SITE_PATH = click.Path(exists=True, file_okay=True, dir_okay=True, path_type=Path)

F = TypeVar("F", bound=Callable[..., Any])

_console = None
_error_console = None


def console():
    """Return the rich console for normal output (stdout)."""
    global _console
    if _console is None:
        from rich.console import Console

        _console = Console(highlight=False)
    return _console


def error_console():
    """Return the rich console for messages (stderr)."""
    global _error_console
    if _error_console is None:
        from rich.console import Console

        _error_console = Console(stderr=True, highlight=False, soft_wrap=True)
    return _error_console


def _verbosity() -> int:
    ctx = click.get_current_context(silent=True)
    while ctx is not None:
        if isinstance(ctx.obj, dict) and "verbosity" in ctx.obj:
            return int(ctx.obj["verbosity"])
        ctx = ctx.parent
    return 0


def _print_error(text: str) -> None:
    from rich.markup import escape

    error_console().print(f"[bold red]Error:[/bold red] [red]{escape(text)}[/red]")


def handle_errors(function: F) -> F:
    """Turn errors into clean messages and exit codes for a command.

    A :class:`~geo3d.errors.Geo3dError` prints its message (every problem, when there are
    several) in red on stderr and exits with code 2. Any other exception prints a short
    message and a hint to run with ``-v``; with ``-v`` the traceback is shown too; exit code 1.
    """

    @functools.wraps(function)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return function(*args, **kwargs)
        except (click.exceptions.Exit, click.ClickException, click.Abort):
            raise
        except Geo3dError as exc:
            problems = getattr(exc, "problems", None)
            if problems:
                _print_error(f"{len(problems)} problems found:")
                from rich.markup import escape

                for problem in problems:
                    error_console().print(f"[red]  - {escape(problem)}[/red]")
            else:
                _print_error(str(exc))
            sys.exit(EXIT_INPUT)
        except KeyboardInterrupt:
            _print_error("interrupted; nothing was written to the output folder")
            sys.exit(130)
        except MemoryError:
            _print_error(
                "ran out of memory; nothing was written to the output folder. Run 'geo3d "
                "check' for the estimated memory of the model and make [grid] cell_size "
                "larger or [simulation] realizations smaller"
            )
            sys.exit(EXIT_FAILURE)
        except Exception as exc:
            if _verbosity() > 0:
                import traceback

                error_console().print(traceback.format_exc(), markup=False)
            _print_error(
                f"unexpected {type(exc).__name__}: {exc}"
                + ("" if _verbosity() > 0 else " (run with -v for details)")
            )
            sys.exit(EXIT_FAILURE)

    return wrapper  # type: ignore[return-value]


def _configure_logging(verbosity: int) -> None:
    level = {-1: logging.ERROR, 0: logging.WARNING, 1: logging.INFO}.get(
        max(-1, min(verbosity, 2)), logging.DEBUG
    )
    root = logging.getLogger("geo3d")
    root.setLevel(level)
    if not any(getattr(h, "_geo3d_cli", False) for h in root.handlers):
        from rich.logging import RichHandler

        rich_handler = RichHandler(console=error_console(), show_path=False, show_time=False)
        rich_handler._geo3d_cli = True  # type: ignore[attr-defined]
        root.addHandler(rich_handler)
    for handler in root.handlers:
        handler.setLevel(level)


def _show_warnings(quiet: bool) -> None:
    """Print geo3d warnings as yellow one-liners (hidden with -q)."""
    import warnings

    from geo3d.errors import Geo3dWarning

    def show(message, category, filename, lineno, file=None, line=None):  # noqa: ANN001
        if quiet and issubclass(category, Geo3dWarning):
            return
        from rich.markup import escape

        label = "Warning" if issubclass(category, Geo3dWarning) else category.__name__
        error_console().print(f"[yellow]{label}:[/yellow] {escape(str(message))}")

    warnings.showwarning = show
    warnings.simplefilter("default", Geo3dWarning)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.option("-v", "--verbose", count=True, help="More messages (-vv for debug).")
@click.option("-q", "--quiet", count=True, help="Fewer messages (errors only).")
@click.version_option(__version__, "--version", prog_name="geo3d")
@click.pass_context
def main(ctx: click.Context, verbose: int, quiet: int) -> None:
    """geo3d: from direct-push injection logs to a 3D hydrogeological site model."""
    ctx.ensure_object(dict)
    ctx.obj["verbosity"] = verbose - quiet
    _configure_logging(verbose - quiet)
    _show_warnings(quiet > 0)


@main.command()
@click.argument("folder", type=click.Path(file_okay=False, path_type=Path))
@click.option("--force", is_flag=True, help="Overwrite an existing site.toml.")
@handle_errors
def init(folder: Path, force: bool) -> None:
    """Write a commented site.toml template into FOLDER."""
    from geo3d.config import TEMPLATE
    from geo3d.errors import OutputExistsError
    from geo3d.io.atomic import atomic_file

    target = folder / "site.toml"
    if target.exists() and not force:
        msg = f"{target} exists; expected a folder without site.toml (use --force to overwrite)"
        raise OutputExistsError(msg)
    folder.mkdir(parents=True, exist_ok=True)
    with atomic_file(target) as tmp:
        tmp.write_text(TEMPLATE.read_text(encoding="utf-8"), encoding="utf-8")
    out = console()
    out.print(f"Wrote {target}. Edit [site] name and crs, then add:", markup=False)
    for line in (
        "borings.csv        boring_id, x, y, ground_elev [, date]",
        "logs/<boring>.csv  one injection log per boring (or LAS 2.0 *.las)",
        "dissipation.csv    boring_id, depth, time_s, pressure",
        "optional: slug_tests.csv, sensor_checks.csv, boundary and zones (GeoJSON/GeoPackage)",
    ):
        out.print(f"  {line}", markup=False)
    out.print(f"Then run: geo3d check {folder}", markup=False)


def _range(values) -> str:
    import numpy as np

    values = np.asarray(values, dtype=float)
    values = values[np.isfinite(values)]
    if values.size == 0:
        return "-"
    return f"{values.min():.2f} to {values.max():.2f}"


def site_summary(site) -> Any:
    """Build a rich table summarising a :class:`~geo3d.site.Site`."""
    from rich.table import Table

    table = Table(title=f"Site: {site.name}", show_header=False, title_justify="left")
    table.add_column("item", style="bold")
    table.add_column("value")
    samples = site.samples
    per_boring = samples.groupby("boring_id").size() if len(samples) else None
    import pyproj

    from geo3d.io.output_frame import OutputFrame, crs_label

    units = site.config.units
    frame = OutputFrame.from_site(site)
    length, unit = frame.length, frame.length_label
    table.add_row("folder", str(site.root))
    table.add_row("CRS", crs_label(pyproj.CRS.from_user_input(site.config.site.crs)))
    if site.config.output.crs:
        table.add_row("output CRS", frame.label)
    table.add_row(
        "input units",
        f"{units.length}, {units.pressure} ({units.pressure_reference}), {units.flow}, {units.ec}",
    )
    table.add_row("borings", str(len(site.borings)))
    table.add_row(
        "samples",
        f"{len(samples)}"
        + (
            f" ({per_boring.min()} to {per_boring.max()} per boring)"
            if per_boring is not None
            else ""
        ),
    )
    table.add_row(f"depth range ({unit})", _range(length(samples["depth"].to_numpy(float))))
    table.add_row(f"elevation range ({unit})", _range(length(samples["elev"].to_numpy(float))))
    ground = length(site.borings["ground_elev"].to_numpy(float))
    table.add_row(f"ground elevation ({unit})", _range(ground))
    n_tests = site.dissipation["test_id"].nunique() if len(site.dissipation) else 0
    dtw = site.config.water.depth_to_water
    water = f"{n_tests}" + (
        "" if isinstance(dtw, str) else f" (depth to water set: {length(dtw):g} {unit})"
    )
    table.add_row("dissipation tests", water)
    table.add_row("slug tests", str(len(site.slug_tests)))
    table.add_row("sensor checks", str(len(site.sensor_checks)))
    zones = ", ".join(map(str, site.zones["name"])) if len(site.zones) else "none"
    table.add_row("treatment zones", f"{len(site.zones)} ({zones})" if len(site.zones) else zones)
    source = site.config.files.boundary or "hull of the borings"
    area = frame.area(site.boundary.area)
    table.add_row(f"boundary area ({frame.area_label})", f"{area:,.0f} ({source})")
    if site.dem is not None:
        table.add_row("DEM", f"{site.dem[0].shape[1]} x {site.dem[0].shape[0]} cells")
    return table


@main.command()
@click.argument("site", type=SITE_PATH)
@handle_errors
def check(site: Path) -> None:
    """Read and validate the site folder SITE, and summarise it (or list every problem).

    Besides the file formats, checks that the data are plausible (coordinates, units, sensor
    values, tests, layout of the borings, settings) and estimates the cells, memory and time
    of the model, refusing a run that would not fit.
    """
    from geo3d.pipeline import estimate_resources, run_check

    result = run_check(site)
    out = console()
    out.print(site_summary(result))
    estimate = estimate_resources(result)
    if estimate is not None:
        out.print(f"Model estimate: {estimate.describe()}", markup=False)
    out.print("[green]Site is valid.[/green]")


# --------------------------------------------------------------------------- run and stages


def _out_options(*, default_out: Path | None = None) -> Callable[[F], F]:
    """Add the options shared by the run, stage and demo commands.

    ``-o/--out`` is required unless ``default_out`` is given.
    """
    options = [
        click.option(
            "-o",
            "--out",
            "out_dir",
            type=click.Path(file_okay=False, path_type=Path),
            required=default_out is None,
            default=default_out,
            show_default=default_out is not None,
            help="Output folder (must be new or empty unless --overwrite).",
        ),
        click.option(
            "--overwrite",
            is_flag=True,
            help="Replace OUT if it exists (only once the run succeeded).",
        ),
        click.option(
            "--realizations",
            type=click.IntRange(min=0),
            default=None,
            help="Number of conditional simulations (overrides [simulation] realizations).",
        ),
        click.option("--no-progress", is_flag=True, help="Do not show progress bars."),
    ]

    def decorate(function: F) -> F:
        for option in reversed(options):
            function = option(function)
        return function

    return decorate


class _StageProgress:
    """Rich progress bars: one per stage, advanced by the pipeline's progress callback."""

    def __init__(self, stages: Sequence[str], *, enabled: bool):
        self.stages = list(stages)
        self.enabled = enabled
        self.progress: Progress | None = None
        self.tasks: dict[str, Any] = {}

    def __enter__(self) -> _StageProgress:
        return self

    def _start(self) -> Progress:
        from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

        progress = self.progress = Progress(
            TextColumn("{task.description:<8}"),
            BarColumn(),
            TextColumn("{task.percentage:>3.0f}%"),
            TimeElapsedColumn(),
            TextColumn("{task.fields[message]}"),
            console=error_console(),
        )
        progress.start()
        for stage in self.stages:
            self.tasks[stage] = progress.add_task(stage, total=1.0, start=False, message="")
        return progress

    def __exit__(self, *exc_info: Any) -> None:
        if self.progress is not None:
            self.progress.stop()

    def __call__(self, stage: str, fraction: float, message: str) -> None:
        if not self.enabled:
            return
        progress = self._start() if self.progress is None else self.progress
        task = self.tasks.get(stage)
        if task is None:
            task = self.tasks[stage] = progress.add_task(stage, total=1.0, start=False, message="")
        progress.start_task(task)
        progress.update(task, completed=max(0.0, min(1.0, fraction)), message=message[:60])


def _summary(results, *, title: str) -> None:
    """Print where the outputs are, the time per stage and the headline volumes."""
    from rich.table import Table

    from geo3d.io.output_frame import OutputFrame
    from geo3d.pipeline import headline_volumes
    from geo3d.units import from_internal

    out = console()
    out.print(f"[bold green]{title}[/bold green]")
    out.print(f"Outputs in [bold]{results.out_dir.resolve()}[/bold]", highlight=False)
    frame = OutputFrame.from_site(results.site)
    out.print(
        f"  coordinates in {frame.label}; lengths in {frame.length_label}, volumes in "
        f"{frame.volume_label}",
        markup=False,
        highlight=False,
    )
    files = [str(p) for p in results.outputs]
    shown = ", ".join(files[:12]) + (f" and {len(files) - 12} more" if len(files) > 12 else "")
    out.print(f"  {shown}", markup=False)
    timings = Table(title="Time per stage", title_justify="left")
    timings.add_column("stage")
    timings.add_column("seconds", justify="right")
    for stage, seconds in results.timings.items():
        timings.add_row(stage, f"{seconds:.1f}")
    out.print(timings)
    if results.volumes is None:
        return
    headline = headline_volumes(results)
    if headline.empty:
        return
    unit = frame.volume_unit
    table = Table(title=f"Headline volumes ({frame.volume_label})", title_justify="left")
    for column in (
        "zone",
        "storage material",
        "P10 to P90",
        "effective pore volume",
        "design volume",
        "points",
    ):
        table.add_column(column, justify="left" if column == "zone" else "right")

    def volume(value: float) -> str:
        return "-" if value != value else f"{from_internal(value, unit, 'volume'):,.0f}"

    for row in headline.itertuples(index=False):
        points = "-" if row.n_points != row.n_points else f"{int(row.n_points)}"
        spread = "-"
        if row.storage_volume_m3_p10 == row.storage_volume_m3_p10:
            spread = f"{volume(row.storage_volume_m3_p10)} to {volume(row.storage_volume_m3_p90)}"
        table.add_row(
            str(row.zone),
            volume(row.storage_volume_m3),
            spread,
            volume(row.effective_pore_volume_m3),
            volume(row.design_volume_m3),
            points,
        )
    out.print(table)


def _run_stages(
    site: Path,
    out_dir: Path,
    *,
    stages=None,
    overwrite: bool,
    realizations: int | None,
    no_progress: bool,
    title: str,
) -> None:
    """Run ``stages`` (default: the whole job, :data:`geo3d.pipeline.STAGES`) with progress."""
    from geo3d.pipeline import STAGES, planned_stages, run

    stages = STAGES if stages is None else stages

    with (
        _terminate_as_interrupt(),
        _StageProgress(planned_stages(stages), enabled=not no_progress) as progress,
    ):
        results = run(
            site,
            out_dir,
            overwrite=overwrite,
            progress=progress,
            n_realizations=realizations,
            stages=stages,
        )
    _summary(results, title=title)


@contextlib.contextmanager
def _terminate_as_interrupt():
    """Turn SIGTERM into KeyboardInterrupt so a killed run removes its staging folder."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def interrupt(signum, frame):
        raise KeyboardInterrupt

    previous = signal.signal(signal.SIGTERM, interrupt)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def _stage_command(name: str, doc: str) -> click.Command:
    """Make the command ``name``: the stage of that name, or the whole job for ``run``."""
    whole = name == "run"
    title = "Run complete." if whole else f"Stage '{name}' complete."

    @main.command(name, help=doc)
    @click.argument("site", type=SITE_PATH)
    @_out_options()
    @handle_errors
    def command(
        site: Path, out_dir: Path, overwrite: bool, realizations: int | None, no_progress: bool
    ) -> None:
        _run_stages(
            site,
            out_dir,
            stages=None if whole else (name,),
            overwrite=overwrite,
            realizations=realizations,
            no_progress=no_progress,
            title=title,
        )

    return command


run_command = _stage_command(
    "run",
    "Run the whole job on SITE and write every output into OUT.\n\n"
    "Reads and checks the site, processes the logs, builds the voxel model with its "
    "simulations, computes maps, volumes and injection plans, and writes the tables, VTK, "
    "GeoTIFF, GeoPackage and NetCDF files, the report and run.log.",
)
logs_command = _stage_command(
    "logs",
    "Process the injection logs of SITE (water level, K, flags, intervals, hydrofacies) and "
    "write the tables into OUT.",
)
model_command = _stage_command(
    "model",
    "Build the voxel model of SITE (runs the logs stage first) and write model.nc, the VTK "
    "files and the cross-validation tables into OUT.",
)
volumes_command = _stage_command(
    "volumes",
    "Compute maps, volumes and injection plans of SITE (runs logs and model first) and write "
    "the tables, GeoTIFF maps and the GeoPackage into OUT.",
)
export_command = _stage_command(
    "export",
    "Run SITE up to the volumes and write every table and exchange file (VTK, GeoTIFF, "
    "GeoPackage, NetCDF) into OUT, without the report.",
)
report_command = _stage_command(
    "report", "Run SITE up to the volumes and write only report.html (and run.log) into OUT."
)


def demo_site_path() -> Path:
    """Locate the bundled demo site (a ``demo_site`` folder beside the package).

    Raises
    ------
    SiteFileError
        If the demo site is not there (it ships with a source checkout installed with
        ``pip install -e .``).
    """
    import geo3d
    from geo3d.errors import SiteFileError

    package = Path(geo3d.__file__).resolve().parent
    candidates = [package.parent / "demo_site", package / "demo_site"]
    for candidate in candidates:
        if (candidate / "site.toml").is_file():
            return candidate
    msg = (
        f"the demo site was not found (looked for site.toml in {candidates[0]}); it ships with "
        "the source checkout: install geo3d from it with 'pip install -e .', or run "
        "'geo3d run <site folder> -o <out>' on a site of your own"
    )
    raise SiteFileError(msg)


@main.command()
@_out_options(default_out=Path("geo3d-demo"))
@handle_errors
def demo(out_dir: Path, overwrite: bool, realizations: int | None, no_progress: bool) -> None:
    """Run the whole job on the bundled demo site into a folder (default ./geo3d-demo)."""
    site = demo_site_path()
    console().print(f"Demo site: {site}", markup=False)
    _run_stages(
        site,
        out_dir,
        overwrite=overwrite,
        realizations=realizations,
        no_progress=no_progress,
        title="Demo run complete.",
    )


@main.command()
@click.argument("site", type=SITE_PATH)
@_out_options()
@click.option(
    "--borings",
    "n_borings",
    type=click.IntRange(min=1, max=50),
    default=3,
    show_default=True,
    help="Number of borings to propose.",
)
@click.option(
    "--target",
    type=click.Choice(["storage", "transmissive", "injection"]),
    default="storage",
    show_default=True,
    help="Design figure whose band the borings should narrow: storage-material volume, mean "
    "transmissive thickness or design injection volume of the treatment zones.",
)
@click.option("--zone", default=None, help="Rank for this treatment zone only (default: all).")
@click.option(
    "--spacing",
    type=click.FloatRange(min=0, min_open=True),
    default=None,
    help="Candidate grid spacing, in the site's length unit (default: about 400 candidates).",
)
@click.option(
    "--min-distance",
    type=click.FloatRange(min=0),
    default=None,
    help="Minimum distance from existing and proposed borings, in the site's length "
    "unit (default: the spacing).",
)
@click.option(
    "--accessible",
    type=click.Path(exists=True, dir_okay=False, path_type=Path),
    default=None,
    help="Polygon layer (GeoJSON/GeoPackage) of the accessible areas.",
)
@click.option(
    "--criterion",
    type=click.Choice(["summed", "block"]),
    default="summed",
    show_default=True,
    help="Rank by the kriging variance summed over the target's "
    "cells, or by the variance of the target itself.",
)
@handle_errors
def advise(
    site: Path,
    out_dir: Path,
    overwrite: bool,
    realizations: int | None,
    no_progress: bool,
    n_borings: int,
    target: str,
    zone: str | None,
    spacing: float | None,
    min_distance: float | None,
    accessible: Path | None,
    criterion: str,
) -> None:
    """Propose where to push the next borings of SITE and write the advice into OUT.

    Builds the model, then ranks candidate locations on a grid inside the site boundary (and
    the accessible areas) by how much one more full-depth boring would reduce the kriging
    variance of the chosen design target, and chooses N borings one after the other. Writes
    proposed_borings.csv, advice_candidates.csv, advice_zones.csv, advice.gpkg,
    advice_map.png and advice.html.
    """
    from geo3d.config import load_config
    from geo3d.pipeline import advise as advise_site
    from geo3d.units import to_internal

    unit = load_config(site).units.length
    lengths = {
        name: None if value is None else float(to_internal(value, unit, "length"))
        for name, value in (("spacing", spacing), ("min_distance", min_distance))
    }
    with (
        _terminate_as_interrupt(),
        _StageProgress(["check", "logs", "model", "advise"], enabled=not no_progress) as bar,
    ):
        result = advise_site(
            site,
            out_dir,
            overwrite=overwrite,
            progress=bar,
            n_realizations=realizations,
            n_borings=n_borings,
            target=target,
            zone=zone,
            accessible=accessible,
            criterion=criterion,
            **lengths,
        )
    _advice_summary(result)


def _advice_summary(result) -> None:
    """Print the proposed borings and where the outputs are."""
    from rich.table import Table

    out = console()
    out.print("[bold green]Advice complete.[/bold green]")
    out.print(f"Outputs in [bold]{result.out_dir.resolve()}[/bold]", highlight=False)
    advice = result.advice
    table = Table(
        title=f"Proposed borings ({advice.target} of {advice.rank_zone}, internal CRS, m)",
        title_justify="left",
    )
    for column in ("rank", "x", "y", "P10-P90 before", "after", "driver zone"):
        table.add_column(column, justify="right")
    for row in advice.proposed.itertuples(index=False):
        table.add_row(
            str(row.rank),
            f"{row.x:.1f}",
            f"{row.y:.1f}",
            f"{row.p10_p90_before:,.4g}",
            f"{row.p10_p90_after:,.4g}",
            str(row.driver_zone),
        )
    out.print(table)
    out.print(f"advise stage: {result.timings.get('advise', float('nan')):.1f} s", markup=False)
