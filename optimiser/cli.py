"""Command line: parsing and printing only; the work happens in the library modules.

To add a command that reads user files, decorate it with ``@input_command`` (or wrap a call in
``run_checked``): an ``InputError`` then prints one line per problem on stderr and exits with
code 2, without a traceback.
"""
from __future__ import annotations

import functools
import math
import signal
import sys
import time
from pathlib import Path

import numpy as np
import typer
from rich.console import Console
from rich.markup import escape as rich_escape
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn, TimeRemainingColumn
from rich.table import Table

from . import __version__
from .catalogs import catalog_summary, load_catalogs
from .design import load_design
from .errors import InputError, Problem
from .evaluate import Evaluator, Settings
from .report.evaluation import ROBUST_HEADERS as robust_headers, design_report, robust_note, robust_rows, rpm_table
from .report.front_data import plural
from .scenario import FIELDS, load_scenario, write_template
from .search import parallel as _parallel
from .search.run import Budget, SearchRun, StopFlag, create_run, new_run_dir, run_search
from .strict_json import dumps as json_dumps

__all__ = ["app", "run_checked", "input_command", "report_problems", "EXIT_INPUT"]

EXIT_INPUT = 2  # bad input files: the user can fix them

app = typer.Typer(
    help="Design a dual-rotor air-cored axial-flux alternator for a sailing boat's propeller "
         "shaft from catalog parts. Safety: guard rotating shafts, handle magnets with care, "
         "charge through a regulator with over-current protection, and defer to local codes, "
         "marine electrical standards and a qualified marine electrician.",
    no_args_is_help=True, add_completion=False, rich_markup_mode=None)
# rich_markup_mode=None: plain click help, which shows a flag as "--json" (the rich help printed
# "<bool>" beside every plain flag, as if it took a value).
catalogs_app = typer.Typer(help="Check the part catalogs (magnets, wires, layouts, discs).",
                           no_args_is_help=True, rich_markup_mode=None)
scenario_app = typer.Typer(help="Write or check a scenario file (boat, space, practice).",
                           no_args_is_help=True, rich_markup_mode=None)


def _version(value: bool):
    if value:
        typer.echo(f"afpm {__version__}")
        raise typer.Exit()


@app.callback()
def _main(version: bool = typer.Option(False, "--version", callback=_version, is_eager=True,
                                       help="Print afpm's version and exit.")):
    pass


app.add_typer(catalogs_app, name="catalogs")
app.add_typer(scenario_app, name="scenario")


def report_problems(problems: list[Problem]) -> None:
    """One plain line per problem on stderr (no wrapping, so each stays greppable)."""
    for p in problems:
        typer.echo(str(p), err=True)
    typer.echo(f"{len(problems)} problem{'s' if len(problems) != 1 else ''} found.", err=True)


def run_checked(func, *args, **kwargs):
    """Call ``func``; on InputError print every problem and exit with code 2."""
    try:
        return func(*args, **kwargs)
    except InputError as exc:
        report_problems(exc.problems)
        raise typer.Exit(EXIT_INPUT)


def input_command(func):
    """Decorator for a command body: InputError -> problem lines on stderr, exit code 2."""
    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        return run_checked(func, *args, **kwargs)
    return wrapper


# --- afpm catalogs ... ------------------------------------------------------------------------
def _span(lo: float, hi: float, scale: float = 1.0) -> str:
    lo, hi = lo * scale, hi * scale
    return f"{lo:.4g}" if lo == hi else f"{lo:.4g} to {hi:.4g}"


def _describe(entry: dict) -> str:
    """Human summary of a catalog's ranges: lengths in mm, the rest in their own unit."""
    parts = []
    for col, (lo, hi) in entry["ranges"].items():
        if col.endswith("_m"):
            parts.append(f"{col[:-2]} {_span(lo, hi, 1e3)} mm")
        else:
            parts.append(f"{col} {_span(lo, hi)}")
    for col, kinds in entry["kinds"].items():
        parts.append(f"{col} {', '.join(kinds)}")
    return "; ".join(parts)


@catalogs_app.command("check")
def catalogs_check(
    directory: Path = typer.Argument(Path("catalogs"), help="Folder with magnets.csv, wires.csv, "
                                     "layouts.csv and discs.csv."),
    as_json: bool = typer.Option(False, "--json", help="Print a JSON summary (or the problems) "
                                 "on stdout for programs."),
):
    """Read the four catalogs, list every problem, or show what each holds."""
    try:
        cat = load_catalogs(directory)
    except InputError as exc:
        if as_json:
            typer.echo(json_dumps({"ok": False, "problems": [p.as_dict() for p in exc.problems]},
                                  indent=2))
            raise typer.Exit(EXIT_INPUT)
        report_problems(exc.problems)
        raise typer.Exit(EXIT_INPUT)
    summary = catalog_summary(cat)
    if as_json:
        typer.echo(json_dumps({"ok": True, "directory": str(directory), "catalogs": summary},
                              indent=2))
        return
    table = Table(title=f"Catalogs in {directory}: all rows valid")
    for name in ("Catalog", "Rows", "Ranges", "File"):
        table.add_column(name, overflow="fold")
    for entry in summary:
        table.add_row(entry["catalog"], str(entry["rows"]), _describe(entry), entry["file"])
    Console().print(table)


# --- afpm scenario ... ------------------------------------------------------------------------
@scenario_app.command("new")
@input_command
def scenario_new(file: Path = typer.Argument(..., help="Scenario file to create (.toml).")):
    """Write a commented scenario template (the Kittiwake demo); never overwrites a file."""
    path = write_template(file)
    typer.echo(f"wrote {path}; edit the values for your boat (each comment says why the default "
               "is what it is)")


@scenario_app.command("check")
@input_command
def scenario_check(file: Path = typer.Argument(None, help="Scenario file; omit for the demo.")):
    """Read a scenario file strictly and show its values (units as in the file)."""
    scenario = load_scenario(file)
    table = Table(title=f"Scenario {scenario.name} ({scenario.source})")
    table.add_column("key")
    table.add_column("value", justify="right")
    for f in FIELDS:
        value = getattr(scenario, f.attr)
        text = str(value) if f.kind is not float else f"{value / f.scale:g}"
        if f.key == "shaft_line_friction_Nm" and scenario.shaft_line_friction_fitted:
            text = f"{value:.3g} (fitted)"
        table.add_row(f.key, text)
    Console().print(table)
    if scenario.shaft_line_friction_fitted:
        typer.echo(f"shaft_line_friction_Nm fitted: {scenario.shaft_line_friction_Nm:.3f} N m makes "
                   f"the propeller free-wheel at {scenario.measured_free_wheel_rpm:g} rpm at "
                   f"{scenario.measured_free_wheel_boat_speed_kn:g} kn (replaces the file's value)")


# --- afpm evaluate ------------------------------------------------------------------------------
def _load_inputs(scenario_file, catalogs_dir):
    return load_scenario(scenario_file), load_catalogs(catalogs_dir)


class _Shown(float):
    """A number that prints as "-" when it is not finite (no value: the design cannot be built)."""

    def __format__(self, spec):
        return float.__format__(self, spec) if math.isfinite(self) else "-"

    def __mul__(self, other):
        return _Shown(float(self) * other)

    __rmul__ = __mul__


def _shown(obj):
    """`obj` with every float as a _Shown, for the text views."""
    if isinstance(obj, dict):
        return {k: _shown(v) for k, v in obj.items()}
    if isinstance(obj, list):
        return [_shown(v) for v in obj]
    return _Shown(obj) if isinstance(obj, float) else obj


def _print_report(report, rows, currency=""):
    console = Console()
    d = report["design"]
    console.print(f"[bold]Design[/bold] {d['magnet']} magnets, layout {d['layout']} x{d['multiple']}, "
                  f"ring {d['ring_radius_mm']:g} mm, disc {d['disc']}, wire {d['wire']} x{d['strands']}, "
                  f"{d['turns']} turns, {d['parallel_paths']} {plural(d['parallel_paths'], 'path')}, {d['connection']}")
    g, e, wnd = report["geometry"], report["electrical"], report["winding"]
    table = Table(title="Build and electrical", show_header=False)
    table.add_column("quantity")
    table.add_column("value", justify="right")
    for label, value in [
        ("coils / poles", f"{wnd['coils']} / {wnd['poles']}"),
        ("winding factor", f"{wnd['winding_factor']:.3f}"),
        ("series coils per path", str(wnd["series_coils_per_path"])),
        ("coil hole (radial x tangential)", f"{g['coil_hole_radial_m']*1e3:.1f} x {g['coil_hole_tangential_m']*1e3:.1f} mm"),
        ("coil leg width", f"{g['coil_leg_width_m']*1e3:.1f} mm"),
        ("coil thickness", f"{g['coil_thickness_m']*1e3:.2f} mm"),
        ("stator thickness / magnet face gap", f"{g['stator_thickness_m']*1e3:.2f} / {g['face_gap_m']*1e3:.2f} mm"),
        ("mean turn length", f"{g['mean_turn_length_m']*1e3:.0f} mm"),
        ("magnet Br (at temperature)", f"{report['magnet']['remanence_T']:.3f} T at {report['magnet']['temperature_C']:.0f} \N{DEGREE SIGN}C"),
        ("phase resistance 20 \N{DEGREE SIGN}C / hot", f"{e['phase_resistance_20C_ohm']:.4f} / {e['phase_resistance_hot_ohm']:.4f} ohm"),
        ("phase inductance", f"{e['phase_inductance_H']*1e3:.3f} mH"),
        ("line EMF per rpm", f"{e['emf_line_rms_per_rpm_V']*1e3:.2f} mV rms"),
        ("back-iron flux density", f"{e['back_iron_flux_density_T']:.2f} T"),
        ("rotor attraction", f"{e['axial_attraction_N']:.0f} N"),
        ("cut-in", f"{report['cut_in_rpm']:.0f} rpm"),
        ("copper", f"{report['materials']['copper_mass_kg']:.2f} kg, {report['materials']['wire_length_m']:.0f} m"),
        ("magnet bill", f"{report['materials']['magnet_cost']:.2f} {currency}"),
    ]:
        table.add_row(label, value)
    console.print(table)
    speeds = Table(title="Against shaft speed")
    for col in ("rpm", "charge A", "battery W", "torque N m", "efficiency %", "coil \N{DEGREE SIGN}C", "line V rms (open)"):
        speeds.add_column(col, justify="right")
    for r in rows:
        speeds.add_row(f"{r['rpm']:.0f}", f"{r['charge_current_A']:.2f}", f"{r['battery_power_W']:.1f}",
                       f"{r['drag_torque_Nm']:.3f}", f"{100 * r['efficiency']:.0f}",
                       "runaway" if r["thermal_runaway"] else f"{r['coil_temperature_C']:.0f}",
                       f"{r['open_circuit_line_rms_V']:.1f}")
    console.print(speeds)
    if "sailing_profile" in report:
        boat = Table(title=f"Over the sailing profile: {report['amp_hours_per_day']:.1f} Ah per day, "
                           f"mean added drag {report['mean_added_drag_N']:.0f} N")
        # Short headers: nine columns fit an 80-column terminal.
        for col in ("kn", "h/day", "rpm", "free rpm", "A", "N m", "drag N", "added N", "coil \N{DEGREE SIGN}C"):
            boat.add_column(col, justify="right")
        for r in report["sailing_profile"]:
            boat.add_row(f"{r['boat_speed_kn']:g}", f"{r['hours_per_day']:g}",
                         "stalled" if r["stalled"] else f"{r['rpm']:.0f}", f"{r['free_wheel_rpm']:.0f}",
                         f"{r['charge_current_A']:.2f}", f"{r['drag_torque_Nm']:.2f}",
                         f"{r['drag_force_N']:.0f}", f"{r['added_drag_N']:.0f}",
                         "runaway" if r.get("thermal_runaway") else f"{r['coil_temperature_C']:.0f}")
        console.print(boat)
    if "robust" in report:
        band = Table(title="What to expect from your build")
        for j, col in enumerate(robust_headers):
            band.add_column(col, justify="left" if j == 0 else "right")
        for row in robust_rows(report, currency):
            band.add_row(*map(rich_escape, row))  # '[rpm]' is not markup
        console.print(band)
        console.print(robust_note(report))
    status = "[green]fits and meets every limit[/green]" if report["feasible"] else "[red]does not work:[/red]"
    console.print(status)
    for p in report["problems"]:
        console.print(f"  - {p}")
    for w in report["warnings"]:
        console.print(f"[yellow]warning:[/yellow] {w}")


def _provenance(sc, cat, settings, run=None):
    """Where every input of an evaluation came from: boat, battery, catalogs, field model."""
    hashes = run.meta.get("catalog_hashes", {}) if run is not None else {}
    files = ", ".join(f"{p.name}" + (f" {hashes[p.name][:12]}" if p.name in hashes else "")
                      for p in cat.files.values())
    folder = Path(next(iter(cat.files.values()))).parent if cat.files else "?"
    return {
        "run": str(run.dir) if run is not None else None,
        "boat": sc.name, "scenario": str(sc.source),
        "battery": f"{sc.battery_nominal_V:g} V nominal, charging at {sc.battery_charging_V:g} V",
        "catalogs": str(folder), "catalog_files": files,
        "field_model": settings.field_model, "inductance": settings.inductance,
    }


FIELD_MODELS = {"fast": "fast (quasi-3-D Fourier field)",
                "reference": "reference (3-D magnet cuboids and their images in the discs)"}


def _origin_note(design_path):
    """A design file written by afpm pick names its run: the line that says how to use it."""
    try:
        head = Path(design_path).read_text(encoding="utf-8-sig")[:2000]
    except (OSError, UnicodeDecodeError):
        return None
    for line in head.splitlines():
        if line.startswith("# re-evaluate with: afpm evaluate --run "):
            return line[2:]
    return None


@app.command("evaluate")
@input_command
def evaluate_command(
    design: Path = typer.Option(None, "--design", help="Design file (TOML) with magnet, layout, "
                                "multiple, ring_radius_mm, disc, wire, strands, turns, parallel_paths, "
                                "connection. Or give --run and --id."),
    scenario: Path = typer.Option(None, "--scenario", help="Scenario file; omit for the demo boat."),
    catalogs: Path = typer.Option(Path("catalogs"), "--catalogs", help="Folder of the catalog CSVs."),
    run: Path = typer.Option(None, "--run", help="Run folder: use that run's scenario and catalog "
                             "snapshot (not --scenario / --catalogs), for --id or --design."),
    design_id: str = typer.Option(None, "--id", metavar="ID", help="A design of the run's front "
                                  "(with --run), e.g. D123."),
    as_json: bool = typer.Option(False, "--json", help="Print one JSON object (SI units) for programs."),
    reference: bool = typer.Option(False, "--reference", help="Use the 3-D reference field model and the finite-volume thermal reference."),
    inductance: bool = typer.Option(False, "--inductance", help="Include the phase inductance in the "
                                    "rectifier (commutation overlap; slower, time-domain)."),
):
    """Evaluate one design: geometry, winding, EMF, charge current, drag torque, temperatures.
    The first lines say which boat, battery, catalogs and field model were used; a design that
    does not fit or breaks a limit lists its reasons with their numbers."""
    settings = Settings(field_model="reference" if reference else "fast",
                        thermal_model="reference" if reference else "fast", inductance=inductance)
    front = None
    if run is not None:
        from .report.front_data import load_front

        if scenario is not None or catalogs != Path("catalogs"):
            raise typer.BadParameter("--run uses the run's own scenario and catalogs: give no "
                                     "--scenario or --catalogs with it")
        front = load_front(run)
        sc, cat = front.scenario, front.catalogs
    else:
        if design_id is not None:
            raise typer.BadParameter("--id names a design of a run's front: give --run RUN too")
        sc, cat = _load_inputs(scenario, catalogs)
    if (design is None) == (design_id is None):
        raise typer.BadParameter("give --design FILE, or --run RUN --id ID")
    evaluator = Evaluator(cat, sc, settings)
    if design_id is not None:
        wanted = design_id.strip().upper()
        wanted = "D" + wanted if wanted.isdigit() else wanted
        if wanted not in front.ids:
            raise InputError([Problem(str(run / "front.csv"), None, "id", f"no design {design_id!r} on "
                                      f"this run's front (its ids run {', '.join(front.ids[:5])} ...)")])
        batch = front.batch.take([front.ids.index(wanted)])
    else:
        batch = load_design(design, cat, evaluator.windings.problem)
    with np.errstate(all="ignore"):  # a design that cannot be built has NaN values: shown as such
        rows = rpm_table(evaluator, batch)
        report = design_report(evaluator, batch, rows)
    report["rpm_table"] = rows
    report["provenance"] = _provenance(sc, cat, settings, front)
    if as_json:
        typer.echo(json_dumps(report, indent=2))
    else:
        p = report["provenance"]
        typer.echo(f"Boat: {p['boat']} ({p['scenario']}); battery {p['battery']}; sailing at "
                   f"{sc.sailing_rpm:g} rpm" + (f"; run {p['run']}" if p["run"] else ""))
        typer.echo(f"Catalogs: {p['catalogs']} ({p['catalog_files']})")
        typer.echo(f"Field model: {FIELD_MODELS[p['field_model']]}; rectifier "
                   + ("with the phase inductance (commutation)" if inductance else "resistive"))
        note = _origin_note(design) if design is not None and run is None else None
        if note and scenario is None:
            typer.echo(f"note: this design file was picked from a run; for that run's boat and "
                       f"catalogs: {note}")
        _print_report(_shown(report), _shown(rows), sc.currency)


# --- afpm search --------------------------------------------------------------------------------

def _search_mapper(search, workers, scheduler):
    """Where the run's chunks are evaluated. Default: serial for the fast model (a population costs
    milliseconds; a pool's start-up and traffic cost more than it saves), every local core for the
    reference model (~0.5 s a design)."""
    if scheduler:
        try:
            return _parallel.make_mapper(search.state.problem.evaluator, scheduler=scheduler)
        except (OSError, TimeoutError) as exc:
            typer.echo(f"could not reach the Dask scheduler at {scheduler}: {exc}; the run is kept: "
                       f"afpm search --run {search.dir} resumes it", err=True)
            raise typer.Exit(EXIT_INPUT)
    if workers is None:
        workers = 1 if search.model == "fast" else _parallel.local_cores()
    return _parallel.make_mapper(search.state.problem.evaluator, workers=workers)


def _budget(hours, minutes, evaluations):
    if hours is not None and minutes is not None:
        raise typer.BadParameter("give --hours or --minutes, not both")
    seconds = hours * 3600.0 if hours is not None else (minutes * 60.0 if minutes is not None else None)
    if seconds is None and evaluations is None:
        return None
    return Budget(evaluations=evaluations, seconds=seconds)


@app.command("search")
@input_command
def search_command(
    scenario: Path = typer.Option(None, "--scenario", help="Scenario file; omit for the demo boat."),
    catalogs: Path = typer.Option(Path("catalogs"), "--catalogs", help="Folder of the catalog CSVs."),
    hours: float = typer.Option(None, "--hours", min=0.0, help="Running-time budget in hours; on "
                                "resume the run's total, time already spent included (see --more-minutes)."),
    minutes: float = typer.Option(None, "--minutes", min=0.0, help="Running-time budget in minutes; on "
                                  "resume the run's total, time already spent included (see --more-minutes)."),
    evaluations: int = typer.Option(None, "--evaluations", min=1, help="Budget of distinct designs "
                                    "evaluated; on resume the run's total (see --more-evaluations)."),
    more_minutes: float = typer.Option(None, "--more-minutes", min=0.0, help="On resume: add this much "
                                       "running time to the run's stored budget [minutes]."),
    more_evaluations: int = typer.Option(None, "--more-evaluations", min=1, help="On resume: add this "
                                         "many designs to the run's stored budget."),
    progress_every: float = typer.Option(60.0, "--progress-every", min=1.0, help="Seconds between "
                                         "plain progress lines when the output is not a terminal "
                                         "(nohup, a log file)."),
    population: int = typer.Option(100, "--population", min=4, help="Designs per generation."),
    seed: int = typer.Option(1, "--seed", help="Random seed: the same seed and budget give the same front."),
    run: Path = typer.Option(None, "--run", help="Run folder: resumes it if it holds a run, else starts one there."),
    fidelity: str = typer.Option(None, "--fidelity", metavar="[fast|reference]",
                                 help="Field model for every design: fast (quasi-3-D Fourier, default) "
                                 "or reference (3-D cuboids + images, ~0.5 s a design: use cores). "
                                 "Fixed when the run starts."),
    workers: int = typer.Option(None, "--workers", min=1, help="Local worker processes (default: 1 "
                                "with the fast model, every core with the reference model)."),
    scheduler: str = typer.Option(None, "--scheduler", help="Address of a running Dask scheduler "
                                  "(tcp://host:8786) to evaluate on instead of local processes; "
                                  "needs Dask (the cluster extra of afpm)."),
    chunk: int = typer.Option(None, "--chunk", min=1, help="Designs per evaluation chunk (default "
                              "256 fast, 4 reference). Fixed when the run starts."),
):
    """Search the catalog choices overnight (NSGA-II style GA) for the Pareto front of the
    scenario's objectives (default: charge current, drag torque, magnet bill, coil temperature).
    Ctrl-C saves and exits 130; --run DIR resumes."""
    budget = _budget(hours, minutes, evaluations)
    more = more_minutes is not None or more_evaluations is not None
    if more and budget is not None:
        raise typer.BadParameter("give a total (--hours, --minutes, --evaluations) or an addition "
                                 "(--more-minutes, --more-evaluations), not both")
    if fidelity not in (None, "fast", "reference"):
        raise typer.BadParameter(f"--fidelity is fast or reference (got {fidelity!r})")
    if scheduler and workers is not None:
        raise typer.BadParameter("give --workers or --scheduler, not both")
    if scheduler and not _parallel.dask_available():
        typer.echo(_parallel.INSTALL_HINT, err=True)
        raise typer.Exit(EXIT_INPUT)
    if run is not None and run.is_dir() and any(run.iterdir()):
        search = SearchRun(run)  # a run to resume, or one line saying why it is none
        for option, given, kept in (("--fidelity", fidelity, search.model),
                                    ("--chunk", chunk, search.meta.get("chunk", 0))):
            if given is not None and given != kept:
                raise InputError([Problem(str(run), None, None, f"this run was started with {option} "
                                          f"{kept}; it cannot change (start a new run)")])
        if budget is not None:
            search.set_budget(budget)
        if more:
            search.set_budget(_extended(search, more_minutes, more_evaluations))
        changed = search.changed_catalogs()
        if changed:
            typer.echo(f"note: {', '.join(changed)} changed since this run started; the run keeps "
                       "using its own snapshot in " + str(run / "catalogs"), err=True)
        typer.echo(f"resuming {run} at generation {len(search.state.history)}, "
                   f"{search.evaluations} designs evaluated; budget {search.budget.describe()}")
    else:
        if more:
            raise typer.BadParameter("--more-minutes and --more-evaluations extend a run being "
                                     "resumed (--run DIR): for a new run give --minutes or --evaluations")
        if run is not None and (run.is_symlink() or (run.exists() and not run.is_dir())):
            raise InputError([Problem(str(run), None, None, "is a file (or a link), not a folder: "
                                      "give a new or empty folder for the run")])
        run_dir = create_run(run or new_run_dir(), scenario, catalogs, seed=seed, population=population,
                             budget=budget or Budget(seconds=8 * 3600.0),
                             settings=Settings(field_model=fidelity or "fast"), chunk=chunk)
        search = SearchRun(run_dir)
        typer.echo(f"new run {run_dir}; budget {search.budget.describe()}; Ctrl-C saves and stops")
    if search.done():
        typer.echo(f"the run's budget ({search.budget.describe()}) is spent; to continue, add to it: "
                   f"afpm search --run {search.dir} --more-minutes M (or --more-evaluations N)")
        search.save("finished", force=True)
        return
    mapper = _search_mapper(search, workers, scheduler)
    typer.echo(f"{search.model} field model; evaluating on {mapper.description}")
    search.attach(mapper)
    b = search.budget

    def fraction():
        parts = []
        if b.evaluations:
            parts.append(search.evaluations / b.evaluations)
        if b.seconds:
            parts.append(search.state.elapsed_s / b.seconds)
        return min(max(parts), 1.0)

    with StopFlag() as stop:
        try:
            if sys.stdout.isatty():
                status = _search_with_bar(search, fraction, stop)
            else:
                status = _search_with_lines(search, fraction, stop, progress_every)
        finally:
            mapper.close()
    _write_front_page_after_search(search)
    typer.echo(f"{status}: {search.evaluations} designs evaluated, {len(search.state.archive)} on the front; "
               f"see {search.dir / 'front.csv'}"
               + ("" if status == "finished" else f"; resume with: afpm search --run {search.dir}"))
    if status == "stopped":
        raise typer.Exit(128 + int(stop.signum or signal.SIGINT))  # 130 after Ctrl-C, as shells report


def _extended(search, more_minutes, more_evaluations):
    """The run's stored budget plus what --more-minutes / --more-evaluations add (a limit the run
    did not have starts from what it has spent)."""
    b = search.budget
    seconds, evaluations = b.seconds, b.evaluations
    if more_minutes is not None:
        seconds = (seconds if seconds else search.state.elapsed_s) + 60.0 * more_minutes
    if more_evaluations is not None:
        evaluations = (evaluations if evaluations else search.evaluations) + more_evaluations
    return Budget(evaluations=evaluations, seconds=seconds)


def _clock(seconds):
    seconds = int(round(max(seconds, 0.0)))
    return f"{seconds // 3600}:{seconds // 60 % 60:02d}:{seconds % 60:02d}"


def _search_with_bar(search, fraction, stop):
    """A terminal: one live progress bar."""
    columns = [TextColumn("{task.fields[model]} gen {task.fields[gen]}"), BarColumn(),
               TextColumn("{task.fields[evals]} designs, {task.fields[feasible]} feasible, "
                          "front {task.fields[front]}, HV {task.fields[hv]}"),
               TimeElapsedColumn(), TextColumn("left"), TimeRemainingColumn()]
    with Progress(*columns, transient=False) as progress:
        task = progress.add_task("search", total=1000, gen=0, model=search.model, evals=search.evaluations,
                                 feasible=0, front=len(search.state.archive), hv="-", completed=fraction() * 1000)

        def update(row):
            progress.update(task, completed=fraction() * 1000, gen=row["generation"], evals=row["evaluations"],
                            feasible=row["feasible"], front=row["front_size"], hv=f"{row['hypervolume']:.4f}")

        return run_search(search, on_generation=update, stop=stop)


def _search_with_lines(search, fraction, stop, every_s):
    """Not a terminal (nohup, a log file): one plain line every `every_s` seconds and at the end,
    flushed at once, never wrapped or cut."""
    last = {"time": None, "row": None, "printed": None}

    def line(row):
        done = fraction()
        elapsed = search.state.elapsed_s
        left = _clock(elapsed * (1.0 - done) / done) if done > 0 else "?"
        typer.echo(f"{search.model} gen {row['generation']}: {row['evaluations']} designs, "
                   f"{row['feasible']} feasible, front {row['front_size']}, HV {row['hypervolume']:.4f}, "
                   f"elapsed {_clock(elapsed)}, left {left} ({100 * done:.0f} % of the budget)")
        sys.stdout.flush()
        last["printed"] = row

    def update(row):
        now = time.monotonic()
        last["row"] = row
        if last["time"] is None or now - last["time"] >= every_s:
            last["time"] = now
            line(row)

    status = run_search(search, on_generation=update, stop=stop)
    if last["row"] is not None and last["printed"] is not last["row"]:
        line(last["row"])
    return status


# --- afpm front / afpm pick (front page and build sheets) ---------------------------------------
def _write_front_page_after_search(search):
    """front.html beside front.csv; a failure here must not lose the search, so it only warns."""
    from .report.front_page import write_front_page

    try:
        path = write_front_page(search)
        typer.echo(f"front page: {path}")
    except Exception as exc:  # noqa: BLE001  the run is saved; the page can be redrawn with afpm front
        typer.echo(f"warning: could not write front.html ({exc}); redraw it with: afpm front {search.dir}",
                   err=True)


@app.command("front")
@input_command
def front_command(
    run: Path = typer.Argument(..., help="Run folder made by afpm search."),
    show: int = typer.Option(None, "--show", min=1, help="Draw at most this many designs (default "
                             "300): each objective's extremes, the best trade-off region and a "
                             "spread of the rest; each drawn design stands for its nearest "
                             "neighbours, which the page can show. Every design stays in front.csv."),
):
    """(Re)draw RUN/front.html: the Pareto front as an interactive page that opens offline."""
    from .report.front_page import DEFAULT_SHOW, write_front_page

    path = write_front_page(run, show=show or DEFAULT_SHOW)
    typer.echo(f"wrote {path}; open it in a browser, click a design, then: afpm pick {run} ID")


@app.command("pick")
@input_command
def pick_command(
    run: Path = typer.Argument(..., help="Run folder made by afpm search."),
    design_id: str = typer.Argument(None, metavar="[ID]", help="Design id from front.csv or front.html, "
                                    "e.g. D123; omit to pick by rule."),
    most: str = typer.Option(None, "--most", metavar="NAME", help="Pick the best design by NAME: any "
                             "objective or value column of front.csv (e.g. amp_hours_per_day, "
                             "mean_added_drag_N, efficiency, cut_in_rpm), the most where more is "
                             "better, the least where less is; or a short word: charge | torque | "
                             "cost | temperature. Default: the scenario's first objective."),
    balanced: bool = typer.Option(False, "--balanced", help="Pick the best compromise of the "
                                  "scenario's objectives by TOPSIS (Hwang and Yoon 1981, equal weights)."),
    at_least: list[str] = typer.Option(None, "--at-least", metavar="NAME=VALUE", help="Only designs "
                                       "whose front.csv column NAME is at least VALUE (in the "
                                       "column's own unit, as in front.csv); repeatable."),
    at_most: list[str] = typer.Option(None, "--at-most", metavar="NAME=VALUE", help="Only designs whose "
                                      "front.csv column NAME is at most VALUE; repeatable."),
    max_torque: float = typer.Option(None, "--max-torque", help="Only designs with drag torque at the "
                                     "sailing rpm at most this [N m]."),
    max_magnet_cost: float = typer.Option(None, "--max-magnet-cost", help="Only designs whose magnet "
                                          "bill is at most this [in the scenario's currency]."),
    max_coil_temp: float = typer.Option(None, "--max-coil-temp", help="Only designs whose coils stay at "
                                        "or below this [\N{DEGREE SIGN}C]."),
    min_charge: float = typer.Option(None, "--min-charge", help="Only designs charging at least this at "
                                     "the sailing rpm [A]."),
):
    """Pick a front design (by ID or by rule), print its summary and write its build sheet
    (build-ID.html for printing, build-ID.md, its templates and design file) into the run folder."""
    from .report.build_sheet import NoMatch, pick, write_build_sheet
    from .report.front_data import load_front

    front = load_front(run)
    rules = (most, max_torque, max_magnet_cost, max_coil_temp, min_charge)
    if design_id is not None and (any(x is not None for x in rules) or balanced or at_least or at_most):
        raise typer.BadParameter("give an ID or a rule (--most, --balanced and limits), not both")
    try:
        chosen = pick(front, design_id, most, max_torque, max_magnet_cost, max_coil_temp, min_charge,
                      at_least or (), at_most or (), balanced)
    except NoMatch as exc:
        typer.echo(f"no match: {exc}", err=True)
        raise typer.Exit(EXIT_INPUT)
    typer.echo(f"picked {chosen.design_id}: {chosen.rule}")
    html_path, md_path, sheet = write_build_sheet(front, chosen.design_id, chosen)
    console = Console()
    for line in sheet.lines:
        console.print(line, markup=False, highlight=False)
    for sec in sheet.sections:
        if sec.title in ("Parts list", "Re-checked with the 3-D reference field model"):
            t = sec.blocks[0][1]
            cols = [0, 2, 3, 4] if sec.title == "Parts list" else list(range(len(t.header)))
            table = Table(title=sec.title)
            for j in cols:
                table.add_column(t.header[j], justify="right" if t.align[j] == "r" else "left", overflow="fold")
            unpriced = [row for row in t.rows if row[-1] == "not priced"]
            for row in [r for r in t.rows if r not in unpriced] + ([t.foot] if t.foot else []):
                table.add_row(*[rich_escape(str(row[j])) for j in cols])
            console.print(table)
            for row in unpriced:
                console.print(f"{row[0]}: {row[1]}", markup=False, highlight=False)
            for block in sec.blocks[1:]:
                if block[0] == "warn":
                    for w in block[1]:
                        console.print("warning: " + w, markup=False, highlight=False)
        if sec.title == "Warnings for this design":
            for w in sec.blocks[0][1]:
                console.print("warning: " + w, markup=False, highlight=False)
    typer.echo(f"build sheet: {html_path} (print it) and {md_path}")
    typer.echo("Cautions: guard the shaft; handle magnets with care; charge through a regulator with a "
               "fuse near the battery; disconnect before motoring; follow local codes, marine electrical "
               "standards and a qualified marine electrician.")

