"""Command line: parsing and printing only; the work happens in the library modules.

To add a command that reads user files, decorate it with ``@input_command`` (or wrap a call in
``run_checked``): an ``InputError`` then prints one line per problem on stderr and exits with
code 2, without a traceback.
"""
from __future__ import annotations

import functools
import json
from pathlib import Path

import typer
from rich.console import Console
from rich.table import Table

from .catalogs import catalog_summary, load_catalogs
from .errors import InputError, Problem
from .scenario import FIELDS, load_scenario, write_template

__all__ = ["app", "run_checked", "input_command", "report_problems", "EXIT_INPUT"]

EXIT_INPUT = 2  # bad input files: the user can fix them

app = typer.Typer(
    help="Design a dual-rotor air-cored axial-flux alternator for a sailing boat's propeller "
         "shaft from catalog parts. Safety: guard rotating shafts, handle magnets with care, "
         "charge through a regulator with over-current protection, and defer to local codes, "
         "marine electrical standards and a qualified marine electrician.",
    no_args_is_help=True, add_completion=False)
catalogs_app = typer.Typer(help="Check the part catalogs (magnets, wires, layouts, discs).",
                           no_args_is_help=True)
scenario_app = typer.Typer(help="Write or check a scenario file (boat, space, practice).",
                           no_args_is_help=True)
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
            typer.echo(json.dumps({"ok": False, "problems": [p.as_dict() for p in exc.problems]},
                                  indent=2))
            raise typer.Exit(EXIT_INPUT)
        report_problems(exc.problems)
        raise typer.Exit(EXIT_INPUT)
    summary = catalog_summary(cat)
    if as_json:
        typer.echo(json.dumps({"ok": True, "directory": str(directory), "catalogs": summary},
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
        table.add_row(f.key, str(value) if f.kind is not float else f"{value / f.scale:g}")
    Console().print(table)
