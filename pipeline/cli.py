"""The ``sightaudit`` command: parses arguments, shows progress, calls the pipeline.

Exit codes: 0 success; 2 unusable input (a one-line reason naming the file,
row or road, and what to fix); 1 an internal error (a bug: please report it).
"""

from __future__ import annotations

import argparse
import contextlib
import os
import shutil
import sys
import time
from pathlib import Path

from .core.config import example_toml, load_config
from .core.errors import InputError
from .core.resources import sample_paths
from .core.version import __version__
from .runner.progress import Progress

# the audit itself (pipeline.api, the runner and the stages) is imported by the commands that
# run it, so that --help and the light commands answer at once


def audit(*args, **kwargs):
    from .api import audit as run_audit

    return run_audit(*args, **kwargs)


def check_inputs(*args, **kwargs):
    from .runner.checks import check_inputs as run_checks

    return run_checks(*args, **kwargs)


def worker_pool(cfg):
    from .runner.pool import worker_pool as pool

    return pool(cfg)


def run_units(cfg):
    from .outputs.method import run_units as units

    return units(cfg)


def get_set(*args, **kwargs):
    from .evaluate.criteria import get_set as get

    return get(*args, **kwargs)


def load_sets(*args, **kwargs):
    from .evaluate.criteria import load_sets as load

    return load(*args, **kwargs)


def template():
    from .evaluate.criteria import template as tpl

    return tpl()

DESCRIPTION = (
    "Screening audit of rural roads for stopping-sight-distance (SSD) shortfalls on crest and "
    "sag vertical curves, from road centrelines and a ground model (DEM or ground points)."
)

# command-line flag -> config key (a flag overrides the config file)
RUN_FLAGS = [
    ("--id-column", "roads.id_column", str, "COLUMN", "column with the road identifier [road_id]"),
    ("--speed-column", "roads.speed_column", str, "COLUMN", "column with the speed to judge each road at [speed_kmh]"),
    ("--roads-layer", "roads.layer", str, "LAYER", "GeoPackage layer holding the centrelines"),
    ("--roads-crs", "roads.crs", str, "CRS", "CRS of a roads CSV, e.g. EPSG:32633"),
    ("--ground-crs", "ground.crs", str, "CRS", "CRS of ground points or DEM when the file has none"),
    ("--elevation-unit", "ground.elevation_unit", str, "UNIT", "ground elevation unit: m, ft or us_ft [m]"),
    ("--step-m", "profile.step_m", float, "M", "station spacing along the road, metres [5]"),
    ("--criteria", "criteria.set", str, "NAME", "criteria set to judge against [aashto-2018-metric]"),
    ("--structures", "structures.file", str, "PATH", "known bridges and culverts to mask (points or lines)"),
    ("--junctions", "junctions.file", str, "PATH", "junctions and accesses to look for beyond crests (points)"),
    ("--surface", "sight.surface", str, "PATH", "surface model with trees and buildings (raster) for the 3D sight lines"),
    ("--speed-source", "speed.source", str, "SOURCE", "attribute (speed column) or predicted (FHWA-RD-99-171)"),
    ("--units", "output.units", str, "SYSTEM", "metric (m, km/h) or us (ft, mph): speeds read, results written"),
    ("--workers", "run.workers", int, "N", "processes for the per-road stages [every core]"),
    ("--engine", "run.engine", str, "ENGINE", "local, or dask to run on a Dask cluster (--scheduler)"),
    ("--scheduler", "run.scheduler", str, "ADDRESS", "Dask scheduler address, e.g. tcp://10.0.0.5:8786"),
]


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="sightaudit", description=DESCRIPTION)
    p.add_argument("--version", action="version", version=f"sightaudit {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    def common(sp):
        g = sp.add_mutually_exclusive_group()
        g.add_argument("-q", "--quiet", action="store_true", help="print errors only")
        g.add_argument("-v", "--verbose", action="store_true", help="print more detail (and tracebacks)")

    run = sub.add_parser("run", help="audit a road network", description=(
        "Audit a road network: rebuild each road's profile from the ground data, recover its "
        "vertical curves, measure sight distance both ways and rank the SSD deficiencies."))
    run.add_argument("--roads", required=True, metavar="PATH",
                     help="road centrelines: GeoPackage, GeoParquet, or CSV with a WKT column")
    run.add_argument("--ground", required=True, metavar="PATH",
                     help="ground model: DEM GeoTIFF, or ground points (CSV/GPKG: road_id, x, y, z)")
    run.add_argument("--config", metavar="FILE.toml", help="settings file (flags below override it)")
    run.add_argument("--out", required=True, metavar="DIR", help="output folder (replaced if it holds an earlier run)")
    for flag, key, typ, metavar, text in RUN_FLAGS:
        run.add_argument(flag, dest=key, type=typ, default=None, metavar=metavar, help=text)
    run.add_argument("--profiles-pdf", dest="output.profiles_pdf", action="store_const", const=True, default=None,
                     help="also write profiles.pdf: one long profile per road, for the field team")
    run.add_argument("--resume", action="store_true",
                     help="after an interrupted run: redo only the chunks of roads not finished")
    common(run)

    val = sub.add_parser("validate", help="check the inputs without running the audit",
                         description="Check roads and ground data as a run would read them, and report what was "
                                     "found: roads, CRS, lengths, speeds, ground coverage and problems.")
    val.add_argument("--roads", required=True, metavar="PATH", help="road centrelines")
    val.add_argument("--ground", required=True, metavar="PATH", help="DEM GeoTIFF or ground points")
    val.add_argument("--config", metavar="FILE.toml", help="settings file")
    for flag, key, typ, metavar, text in RUN_FLAGS[:7] + [f for f in RUN_FLAGS if f[0] == "--units"]:
        val.add_argument(flag, dest=key, type=typ, default=None, metavar=metavar, help=text)

    init = sub.add_parser("init", help="write an example settings file, every setting explained",
                          description="Write a settings file listing every setting with its default and meaning.")
    init.add_argument("path", nargs="?", default="sightaudit.toml", help="file to write [sightaudit.toml]")
    init.add_argument("--force", action="store_true", help="replace the file if it exists")

    crit = sub.add_parser("criteria", help="list the criteria sets, or show one",
                          description="List the criteria sets (published SSD and K values), or show one.")
    crit.add_argument("name", nargs="?", help="set to show, e.g. aashto-2018-metric")
    crit.add_argument("--config", metavar="FILE.toml", help="settings file (for criteria.files of your own)")
    crit.add_argument("--template", action="store_true", help="print a CSV to fill in for a set of your own")

    demo = sub.add_parser("demo", help="run the audit on the bundled sample network",
                          description="Run the whole audit on the bundled Wendle Vale sample network.")
    demo.add_argument("--out", default="out/demo", metavar="DIR", help="output folder [out/demo]")
    demo.add_argument("--profiles-pdf", dest="output.profiles_pdf", action="store_const", const=True, default=None,
                      help="also write profiles.pdf")
    common(demo)
    return p


class _PlainProgress:
    """One line per finished stage, for logs (stderr is not a terminal)."""

    def __init__(self, stream):
        self.stream = stream

    @contextlib.contextmanager
    def stage(self, name: str, total: float | None = None, unit: str = ""):
        t0 = time.perf_counter()
        count = [0.0]

        def tick(n: float = 1, what: str | None = None):
            count[0] += n

        yield tick
        if total is None:
            what = ""
        elif unit:
            what = f", {count[0]:,.1f} of {total:,.1f} {unit}"
        else:
            what = f", {count[0]:g} of {total:g} steps"
        print(f"{name}{what} ({time.perf_counter() - t0:.1f} s)", file=self.stream)

    def message(self, text: str) -> None:
        print(text, file=self.stream)


class _RichProgress:
    """Progress bars on stderr, one per stage: the amount done (km of road for the per-road
    stages, steps for writing outputs, with the step at hand) and the time left, estimated from
    the amount done so far (elapsed x left / done), shown from the first tick on."""

    def __init__(self, console):
        from rich.progress import BarColumn, Progress, ProgressColumn, TextColumn, TimeElapsedColumn
        from rich.text import Text

        class Amount(ProgressColumn):
            def render(self, task):
                unit = task.fields.get("unit", "")
                if unit:
                    return Text(f"{task.completed:,.1f}/{task.total:,.1f} {unit}")
                return Text(f"{task.completed:,.0f}/{task.total:,.0f}")

        class TimeLeft(ProgressColumn):
            def render(self, task):
                if task.finished:
                    return Text("done")
                elapsed = task.elapsed or 0.0
                if not task.completed or not task.total or elapsed <= 0:
                    return Text("eta -:--:--")
                left = int(round(elapsed * (task.total - task.completed) / task.completed))
                return Text(f"eta {left // 3600}:{left // 60 % 60:02d}:{left % 60:02d}")

        self.console = console
        self._cols = (TextColumn("{task.description:<28}"), BarColumn(), Amount(), TimeElapsedColumn(), TimeLeft(),
                      TextColumn("{task.fields[step]}"))
        self._progress_cls = Progress

    @contextlib.contextmanager
    def stage(self, name: str, total: float | None = None, unit: str = ""):
        with self._progress_cls(*self._cols, console=self.console, transient=False) as prog:
            task = prog.add_task(name, total=total if total is not None else 1, unit=unit, step="")

            def tick(n: float = 1, what: str | None = None):
                prog.update(task, advance=n, step=what or "")

            yield tick
            prog.update(task, completed=total if total is not None else 1, step="")

    def message(self, text: str) -> None:
        self.console.print(text)


def _progress(args):
    if args.quiet:
        return Progress()
    if not sys.stderr.isatty():
        return _PlainProgress(sys.stderr)
    from rich.console import Console

    return _RichProgress(Console(stderr=True))


def _print_summary(summary: dict, out: Path, quiet: bool) -> None:
    """The closing summary: a table on a terminal, plain lines in a log."""
    if quiet:
        return
    r = summary["roads"]
    net = next((x for x in summary.get("audit_summary", []) if x["road_class"] == "network"), {})
    u = summary.get("units", {"distance": "km", "factor_km": 1.0})
    dist = lambda km: f"{(km or 0) / u['factor_km']:.2f} {u['distance']}"  # noqa: E731
    rows = [
        ("Roads", f"{r['in']} in, {r['evaluated']} evaluated, {r['skipped']} skipped"),
        ("Length audited", dist(net.get("km_audited"))),
        ("Substituted speeds", f"{r.get('judged_at_substituted_speeds', 0)} road(s) (see data_notes.csv)"),
        ("Vertical curves", f"{int(net.get('curves') or 0)} ({int(net.get('crests') or 0)} crests, "
                            f"{int(net.get('sags') or 0)} sags)"),
        ("Deficient curves", f"{int(net.get('deficient_curves') or 0)}"),
        ("Deficient stretches", f"{int(net.get('deficient_stretches') or 0)}: severe {dist(net.get('deficient_km_severe'))}, "
                                f"moderate {dist(net.get('deficient_km_moderate'))}, minor {dist(net.get('deficient_km_minor'))}"),
        ("Hiding a hazard", f"{summary.get('hazard_stretches', 0)} stretch(es)"),
        ("Time", f"{summary.get('total_seconds', 0):.1f} s"),
        ("Output folder", str(out.resolve())),
    ]
    sheets = summary.get("profiles_pdf")
    if sheets:
        rows.append(("Field sheets", f"profiles.pdf, {sheets['pages']} sheet(s), {sheets['paper']} "
                                     f"({sheets['paper_choice']}), horizontal {sheets['horizontal_scale']}, "
                                     f"{sheets['sheet_length']:,.0f} {sheets['unit']} a sheet"))
        rows += [("Field sheets", note) for note in sheets.get("notes", [])]
    for reason, n in r["skipped_by_reason"].items():
        rows.append((f"Skipped ({n})", reason))
    if sys.stdout.isatty():
        from rich.console import Console
        from rich.table import Table

        table = Table(title="sightaudit: audit finished", show_header=False, title_justify="left")
        table.add_column(style="bold")
        table.add_column()
        for k, v in rows:
            table.add_row(k, v)
        Console().print(table)
    else:
        for k, v in rows:
            print(f"{k}: {v}")
    print("Screening results only: confirm by field survey and a licensed engineer; local codes govern. "
          "Start with report.html.")


def _run(args, roads: str, ground: str, overrides: dict, config: str | None) -> int:
    cfg = load_config(config, overrides)
    out = Path(args.out)
    # chunk results wait beside the output folder until the outputs are complete (for --resume)
    work_dir = out.resolve().parent / f".{out.resolve().name}.work"
    progress = _progress(args)
    with worker_pool(cfg) as pool:
        result = audit(roads, ground, cfg, progress=progress, work_dir=work_dir,
                       resume=getattr(args, "resume", False), pool=pool, command=sys.argv[1:])
        summary = result.write(out, pool, progress=progress)
    shutil.rmtree(work_dir, ignore_errors=True)
    _print_summary(summary, out, args.quiet)
    failed = summary.get("output_failures") or []
    if failed:
        print("sightaudit: error: not written: " + "; ".join(f"{f['output']} ({f['error']})" for f in failed)
              + f"; the data outputs in {out} are complete, run.json records the failure", file=sys.stderr)
        return 1
    return 0


def _init(args) -> int:
    path = Path(args.path)
    if path.exists() and not args.force:
        raise InputError(f"{path}: exists already; give another name or add --force to replace it")
    path.write_text(example_toml(), encoding="utf-8")
    print(f"Wrote {path.resolve()}: every setting with its default and meaning, commented out.")
    print(f"Edit what you need, then: sightaudit run --roads ROADS --ground GROUND --config {path} --out DIR")
    return 0


def _validate(args) -> int:
    overrides = {key: getattr(args, key, None) for _, key, _, _, _ in RUN_FLAGS}
    cfg = load_config(args.config, overrides)
    info = check_inputs(args.roads, args.ground, cfg)
    units = run_units(cfg)
    g = info["ground"]

    def length(metres: float, digits: int = 0) -> str:
        return f"{units.length(metres):.{digits}f} {units.length_label}"

    print(f"Roads:   {info['roads_file']}")
    print(f"         {info['roads']} road(s), {info['roads_usable_geometry']} with usable geometry, "
          f"{info['length_km'] / units.km_per_distance:.2f} {units.distance_label} in all (shortest "
          f"{length(info['length_min_m'])}, median {length(info['length_median_m'])}, longest "
          f"{length(info['length_max_m'])})")
    print(f"         CRS {info['roads_crs']}; lengths measured in {', '.join(info['working_crs'])}")
    print("         speeds: " + ", ".join(f"{k} {v}" for k, v in info["speed"].items()))
    print(f"Ground:  {info['ground_file']}")
    if g["kind"] == "dem":
        print(f"         DEM, CRS {g['crs']}, cells {g['cell_size'][0]:g} x {g['cell_size'][1]:g} (CRS units), "
              f"{g['size'][0]} x {g['size'][1]} cells, nodata {g['nodata']}")
    else:
        print(f"         ground points ({g['mode']}), {g['rows']} rows")
    print(f"         ground data cover {info['ground_coverage_pct']:.1f} % of the road length; elevations in "
          f"{info['elevation_unit']}")
    gp = info["grade_pct"]
    if gp:
        from .runner.evidence import GRADE_BASE_M

        print(f"         grades over {length(GRADE_BASE_M)}: median {gp['p50']:.1f} %, 90th percentile "
              f"{gp['p90']:.1f} %, 99th {gp['p99']:.1f} %; {info['steep_pct']:.1f} % of the length steeper than "
              f"{cfg['artefacts.max_road_grade_pct']:g} %")
    dq = info["data_quality"]
    if dq["resolution_m"] is not None:
        own = "DEM cells" if dq["ground_kind"] == "dem" else "ground points every"
        print(f"What the ground data can support: {own} {length(dq['spacing_m'], 1)}; shortest feature resolved "
              f"about {length(dq['resolution_m'])}")
    for sentence in dq["cannot_judge"]:
        print(f"  - {units.text(sentence)}")
    if info["problems"]:
        print(f"Problems ({len(info['problems'])}):")
        for p in info["problems"]:
            print(f"  - {units.text(p)}")
    else:
        print("Problems: none found")
    if info["refusals"]:
        for r in info["refusals"]:
            print(f"sightaudit: error: {units.text(r)}", file=sys.stderr)
        print("The inputs cannot be audited as they are: a run would stop (see the error).")
        return 2
    if info["would_skip"] >= info["roads"]:
        print("sightaudit: error: a run would skip every road (see Problems); fix the inputs", file=sys.stderr)
        print("The inputs cannot be audited as they are: every road would be skipped.")
        return 2
    if info["substituted_speeds"]:
        print(f"A run would go ahead, but {info['substituted_speeds']} road(s) would be judged at substituted "
              f"speeds (listed above); fill in their speeds for a trustworthy verdict.")
        return 0
    print("The inputs can be audited: sightaudit run --roads ... --ground ... --out DIR")
    return 0


def _criteria(args) -> int:
    if args.template:
        print(template(), end="")
        return 0
    files = load_config(args.config)["criteria.files"]
    if not args.name:
        sets, _ = load_sets(files)
        print("Criteria sets (sightaudit criteria NAME shows one):")
        for _, r in sets.iterrows():
            print(f"  {r['name']:<24} {r['title']} [{r['units']}]")
        return 0
    cs = get_set(args.name, files)
    p = cs.params
    lu, su = ("m", "km/h") if cs.metric else ("ft", "mph")
    print(f"{p['name']}: {p['title']}")
    print(f"  source:   {p['source']}")
    print(f"  edition:  {p['edition']}")
    print(f"  values:   {p['source_marks']}")
    print(f"  heights:  eye {p['eye_height']:g} {lu}, object {p['object_height']:g} {lu}, "
          f"headlight {p['headlight_height']:g} {lu}, beam {p['beam_angle_deg']:g} deg up")
    print(f"  braking:  reaction {p['reaction_time_s']:g} s, deceleration {p['deceleration']:g} {lu}/s2; "
          f"SSD = {p['speed_coef']:g} V t + {p['braking_coef']:g} V^2 / a, rounded up to {p['rounding_step']:g} {lu}")
    print(f"  K:        crest S^2 / {p['crest_k_const']:g}; sag S^2 / ({p['sag_k_const']:g} + {p['sag_k_per_s']:g} S)")
    print(f"  {'speed ' + su:>10} {'SSD ' + lu:>8} {'crest K':>8} {'sag K':>6}")
    for _, r in cs.table.iterrows():
        print(f"  {r['speed']:>10g} {r['ssd_design']:>8g} {r['crest_k']:>8g} {r['sag_k']:>6g}")
    return 0


def main(argv: list[str] | None = None) -> int:
    """The ``sightaudit`` command.

    Parameters
    ----------
    argv : list of str, optional
        The arguments (``sys.argv[1:]`` by default).

    Returns
    -------
    int
        Exit code: 0 success; 1 an internal error or an extra output not written; 2 an input to
        fix (one line on standard error says what).
    """
    args = _parser().parse_args(argv)
    if args.command is None:
        _parser().print_help()
        return 0
    start = time.perf_counter()
    try:
        if args.command == "run":
            overrides = {key: getattr(args, key) for _, key, _, _, _ in RUN_FLAGS}
            overrides["output.profiles_pdf"] = getattr(args, "output.profiles_pdf", None)
            return _run(args, args.roads, args.ground, overrides, args.config)
        if args.command == "criteria":
            return _criteria(args)
        if args.command == "init":
            return _init(args)
        if args.command == "validate":
            return _validate(args)
        if args.command == "demo":

            paths = sample_paths()
            return _run(args, str(paths["roads"]), str(paths["dem"]), {"structures.file": str(paths["structures"]),
                                                                       "junctions.file": str(paths["junctions"]),
                                                                       "output.profiles_pdf": getattr(
                                                                           args, "output.profiles_pdf", None)},
                        None)
    except InputError as err:
        print(f"sightaudit: error: {err}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("sightaudit: interrupted; no output was written", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into a pager or head that stopped reading

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except Exception as err:  # a bug, not bad input
        if getattr(args, "verbose", False):
            raise
        print(f"sightaudit: internal error after {time.perf_counter() - start:.1f} s: "
              f"{type(err).__name__}: {' '.join(str(err).split())[:300]} (run with --verbose for details; "
              f"please report it)", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
