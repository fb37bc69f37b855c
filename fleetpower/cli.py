"""Command line: parses, calls the library, renders. Nothing else lives here."""

from __future__ import annotations

import argparse
import gc
import json
import os
import sys
import time
from pathlib import Path

from rich.console import Console

from . import __version__
from .errors import FleetpowerError, InputError, SolverError, printable
from .report.format import QUANTITY_LABELS, humanize, quantity_label, si_text, use_unicode  # noqa: F401 (re-exported)

EXIT_OK = 0
EXIT_VERDICT = 1  # only with --strict: a check failed
EXIT_INPUT = 2
EXIT_SOLVER = 3
EXIT_INTERNAL = 4  # a fault of the program itself (the one line asks for --debug)
EXIT_INTERRUPTED = 130  # 128 + SIGINT, the shells' convention
EXIT_CLOSED_PIPE = 141  # 128 + SIGPIPE: the reader stopped early (`| head`)

#: columns --width accepts (narrower tables cannot be read, wider ones only cost memory)
WIDTH_MIN, WIDTH_MAX = 40, 1000


class _Screen(Console):
    """The report's console: a closed stdout (`| head`) raises BrokenPipeError for
    :func:`main` to end quietly, where rich's default would exit 1 (a failed check)."""

    def on_broken_pipe(self) -> None:
        self.quiet = True
        raise BrokenPipeError(32, "Broken pipe")


def _console(args) -> Console:
    screen = _Screen(width=getattr(args, "width", None) or None, highlight=False)
    # µ and Ω where the output can encode them (a UTF-8 terminal or file), u and ohm otherwise
    use_unicode(screen.encoding.lower().replace("-", "").startswith("utf"))
    return screen


def _status(message: str):
    """A spinner on stderr while the engine works (silent when stderr is not a terminal)."""
    return Console(stderr=True).status(message, spinner="line")


def _width(text: str) -> int:
    """``--width``: a whole number of columns in WIDTH_MIN..WIDTH_MAX (argparse type)."""
    try:
        n = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"not a whole number of columns: {printable(text[:40])!r}") from None
    if not WIDTH_MIN <= n <= WIDTH_MAX:
        raise argparse.ArgumentTypeError(
            f"{n} columns is outside {WIDTH_MIN}..{WIDTH_MAX}")
    return n


def _folder_option(path, option: str) -> None:
    """Refuse, before any solving, an output folder that exists as something else."""
    if path and os.path.exists(path) and not os.path.isdir(path):
        raise InputError(path, option, "exists and is not a folder")


#: set by :func:`run`: this process is the command line itself, not a library caller
_OWN_PROCESS = False


def _blas_probe_without_scipy_linalg() -> None:
    """Let numba's BLAS probe find scipy's BLAS wrappers without importing scipy.linalg.

    When numba first loads compiled code it initialises all of its array support, which
    checks once that BLAS is there by ``import scipy.linalg.cython_blas``; that imports the
    whole scipy.linalg package (~0.22 s CPU, a fifth of a warm ``unit``) although the
    engine calls no BLAS. Loading that one extension module under its own name first
    answers the probe (numba's C helpers find it in ``sys.modules`` as they would after a
    full import). A later ``import scipy.linalg`` imports the package as usual; it reuses
    this module. Only in the command line's own process (:func:`run`), never for a library
    caller; on any surprise (scipy laid out otherwise) nothing is done.
    """
    if not _OWN_PROCESS or "scipy.linalg.cython_blas" in sys.modules \
            or "scipy.linalg" in sys.modules:
        return
    import importlib.machinery
    import importlib.util

    name = "scipy.linalg.cython_blas"
    try:
        import scipy

        spec = importlib.machinery.PathFinder.find_spec(
            "cython_blas", [os.path.join(os.path.dirname(scipy.__file__), "linalg")])
        if spec is None or not isinstance(spec.loader, importlib.machinery.ExtensionFileLoader):
            return
        spec = importlib.util.spec_from_file_location(
            name, spec.origin, loader=importlib.machinery.ExtensionFileLoader(name, spec.origin))
        module = importlib.util.module_from_spec(spec)
        sys.modules[name] = module
        spec.loader.exec_module(module)
    except Exception:  # leave numba to import it the usual way
        sys.modules.pop(name, None)


def _outputs_free(args, paths, option: str) -> None:
    """Refuse, before the work, an output file that exists unless ``--force`` is given."""
    from .io.files import check_writable

    check_writable(paths, getattr(args, "force", False), option)


def _engine_ready() -> None:
    """Compile the circuit engine now if this machine has no compiled copy yet, saying so.

    The first run after installing compiles the numba engine once (its cache then lives
    beside the package); without this note the spinner would claim to be solving.
    """
    _blas_probe_without_scipy_linalg()
    from .engine import solver

    if solver.engine_is_compiled():
        return
    err = Console(stderr=True, highlight=False)
    err.print("fleetpower: compiling the circuit engine for this machine; this happens "
              "once, later runs start in about a second", soft_wrap=True)
    t0 = time.perf_counter()
    with err.status("compiling the circuit engine (once)", spinner="line"):
        solver.compile_engine()
    err.print(f"fleetpower: engine compiled in {time.perf_counter() - t0:.0f} s")


def _wrote(paths) -> None:
    """One line on stderr naming every file written."""
    paths = [str(p) for p in paths]
    if paths:
        print(f"fleetpower: wrote {', '.join(paths)}", file=sys.stderr)


def failed_checks(report: dict) -> list[str]:
    """What --strict counts as a failed verdict in a unit, fleet or compare report.

    A unit: a limit or a component stress that fails. A fleet: a limit (IEEE 519) that
    fails or a conductor over its rating. A comparison: no candidate free of failed checks.
    A spread: any check failed by any unit of the run, or, with ``--years``, the P5 unit
    unable to deliver its heaviest state within the years studied.
    """
    if "designs" in report:  # compare
        counts = [d.get("failed_checks", 0) for d in report["designs"]]
        return [] if not counts or min(counts) == 0 else ["every candidate fails a check"]
    out = []
    for row in report.get("failing") or []:  # spread
        if row.get("fraction", 0.0) > 0.0:
            out.append(f"{row['kind']}: {humanize(row['check'])} in {row['fraction']:.1%} "
                       "of the units")
    ageing = report.get("ageing") or {}
    if ageing.get("p5_fails_year") is not None:
        out.append(f"ageing: the P5 unit cannot deliver state '{ageing['state']}' from year "
                   f"{ageing['p5_fails_year']}")
    for row in report.get("compliance") or []:
        if row.get("verdict") == "fail":
            out.append(f"limit: {row.get('edition') or row.get('set', '')}")
    for row in report.get("stresses") or []:
        if row.get("verdict") == "fail":
            out.append(f"stress: {row.get('item', '')}")
    for row in report.get("conductors") or []:
        if row.get("verdict") == "over":
            out.append(f"conductor: {row.get('conductor', '')} over its rating")
    return out


def _verdict_exit(args, report: dict) -> int:
    if not getattr(args, "strict", False):
        return EXIT_OK
    failed = failed_checks(report)
    if failed:
        print(f"fleetpower: --strict: {len(failed)} failed check(s), the first a "
              f"{failed[0]} (exit 1)", file=sys.stderr)
        return EXIT_VERDICT
    return EXIT_OK


def cmd_unit(args) -> int:
    from .io.design_file import load_design
    from .report import render_unit, unit_to_dict
    from .unit import analyse_unit

    design = load_design(args.design)
    if args.limits:  # read the user's limit file before the (longer) solve
        from .limits.tables import limit_records

        limit_records(args.limits)
    states = [args.state] if args.state else None
    if args.state and args.state not in design.states:
        from .errors import suggest

        raise InputError(args.design, "--state",
                         f"unknown state {args.state!r}{suggest(args.state, design.states)}")
    if args.waveform_csv:  # fail fast: before the solve
        _outputs_free(args, _waveform_paths(args.waveform_csv, states or list(design.states)),
                      "--waveform-csv")
    _engine_ready()
    with _status(f"solving {design.name} to periodic steady state"):
        analysis = analyse_unit(design, states, limits_file=args.limits)
    report = unit_to_dict(analysis)
    written = (_write_waveforms(args.waveform_csv, analysis, args.force)
               if args.waveform_csv else [])
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        render_unit(report, _console(args))
    _wrote(written)
    return _verdict_exit(args, report)


def _waveform_paths(target: str, states: list[str]) -> list[Path]:
    """``--waveform-csv FILE``'s files: ``FILE``, or ``FILE-<state>`` for several states."""
    base = Path(target)
    if len(states) == 1:
        return [base]
    return [base.with_name(f"{base.stem}-{s}{base.suffix}") for s in states]


def _write_waveforms(target: str, analysis, force: bool = False) -> list[Path]:
    """Each analysed state's cycle, repeated over the IEC window, as a capture file
    (``FILE``, or ``FILE-<state>`` for several states); none written when one exists
    and ``force`` is false."""
    from .io.capture_file import write_capture
    from .io.files import check_writable
    from .pq.capture import repeat_cycle

    def how(r):
        return "simulated" if r.circuit_known else "rebuilt from the measured spectrum"

    targets = _waveform_paths(target, [r.state for r in analysis.states])
    check_writable(targets, force, "--waveform-csv")
    paths = []
    for r, path in zip(analysis.states, targets, strict=True):
        t, v, i = repeat_cycle(r.t_s, r.v_v, r.i_a)
        write_capture(path, t, v, i, [
            f"{analysis.design.name}, state '{r.state}': the steady-state cycle repeated "
            f"over the IEC 61000-4-7 window ({how(r)} by fleetpower)",
            "voltage line-to-neutral at the plug; current into the supply positive"],
            overwrite=force, option="--waveform-csv")
        paths.append(path)
    return paths


def cmd_limits(args) -> int:
    from rich.table import Table

    from . import limits as L

    console = _console(args)
    if args.set is None:
        if args.json:
            print(L.list_limit_sets().to_json(orient="records", indent=2))
            return 0
        from .limits.catalogue import set_summaries  # without pandas: a quick listing

        t = Table(title="Limit sets shipped (data/limits/)", title_justify="left")
        for col in ("set", "title", "edition", "clause", "provenance", "rows"):
            t.add_column(col, overflow="fold")
        for row in set_summaries():
            t.add_row(*[str(row[c]) for c in ("set", "title", "edition", "clause",
                                              "provenance", "rows")])
        console.print(t)
        return 0
    recs = L.limit_records(args.set)  # plain rows: a set shown on screen needs no pandas
    if not recs:
        raise InputError(args.set, "", "holds no limit rows (only a header)")
    if args.json:
        print(L.limit_frame(recs).to_json(orient="records", indent=2))
        return 0
    header, columns, rows = limit_set_view(recs)
    console.print(f"[bold]Limit set {args.set}[/bold]")
    for label, value in header:
        console.print(f"  {label}: {value}", highlight=False)
    t = Table(box=None, pad_edge=False, header_style="bold")
    for c in columns:
        t.add_column(c, overflow="fold", justify="right" if c in ("h", "limit") else "left")
    for row in rows:
        t.add_row(*row)
    console.print(t)
    return 0


_KIND_UNITS = {"pct_of_fundamental": "% of I1", "pct_of_fundamental_times_pf": "% of I1 x PF",
               "pct_of_il": "% of I_L", "per_watt": "A/W"}


def _num(v) -> str:
    return "" if v is None or v != v else f"{v:g}"


def _limit_text(r) -> str:
    if r["kind"] == "formula":
        coef = ", ".join(f"{k} = {_num(r[k])}" for k in ("a", "b", "c") if _num(r[k]))
        return f"{r['form'].replace('_', '-')} in P ({coef})"
    if r["kind"] in _KIND_UNITS:
        return f"{_num(r['limit'])} {_KIND_UNITS[r['kind']]}"
    return si_text(r["limit"], r["unit"])


def _applies_text(r) -> str:
    lo, hi = _num(r["applies_from_w"]), _num(r["applies_to_w"])
    parts = []
    if lo and hi:
        parts.append(f"{lo}-{hi} W")
    elif lo:
        parts.append(f"above {lo} W")
    elif hi:
        parts.append(f"up to {hi} W")
    if r.get("range_on"):
        name = {"isc_over_il": "Isc/I_L", "bus_kv": "bus kV"}.get(r["range_on"], r["range_on"])
        a, b = _num(r["range_from"]), _num(r["range_to"])
        parts.append(f"{a or '0'} <= {name} < {b}" if b else f"{name} >= {a}")
    return "; ".join(parts)


def limit_set_view(df) -> tuple[list[tuple[str, str]], list[str], list[list[str]]]:
    """One limit set (its records, or a DataFrame) as (header lines shown once, table
    columns, table rows).

    What is the same on every row (title, edition, clause, provenance, direction, where
    it applies) is said once above the table; harmonic orders are integers; a limited
    quantity gets a person's name, never its key.
    """
    recs = df if isinstance(df, list) else df.to_dict("records")
    cols = {
        "quantity": [quantity_label(r["quantity"]) for r in recs],
        "h": ["" if r["harmonic"] != r["harmonic"] else str(int(r["harmonic"]))
              for r in recs],
        "limit": [_limit_text(r) for r in recs],
        "must be": [{"max": "at most", "min": "at least"}.get(r["direction"], r["direction"])
                    for r in recs],
        "applies": [_applies_text(r) for r in recs],
        "in force from": [r["in_force_from"] for r in recs],
        "clause": [r["clause"] for r in recs],
        "provenance": [r["provenance"] for r in recs],
        "note": [r["note"] for r in recs],
    }
    header = [("title", recs[0]["title"]), ("edition", recs[0]["edition"])]
    shown = []
    for name, values in cols.items():
        distinct = set(values)
        if name in ("quantity", "limit") or len(distinct) > 1:
            shown.append(name)
        elif values[0]:
            header.append((name, values[0]))
    header = [(k, v) for k, v in header if v]
    rows = [[cols[c][k] for c in shown] for k in range(len(recs))]
    return header, shown, rows


def _progress_printer(what: str = "simulated"):
    """A progress callback printing to a terminal's stderr (None when not a terminal)."""
    err = Console(stderr=True)

    def show(done, total, name):
        err.print(f"[dim]{what} {done}/{total}: {name}[/dim]")

    return show if err.is_terminal else None


def cmd_fleet(args) -> int:
    from .fleet import evaluate_fleet
    from .io.files import write_atomic
    from .io.fleet_file import load_fleet
    from .report import fleet_to_dict, render_fleet

    if args.csv:  # fail fast: before the fleet is read and evaluated
        _outputs_free(args, [args.csv], "--csv")
    spec = load_fleet(args.fleet)
    _engine_ready()
    notes = []
    if args.at is not None:
        from .spread.study import fleet_at_percentile, parse_percentile

        at = parse_percentile(args.at, file=args.fleet)
        with _status(f"drawing each design's spread for its P{at:g} unit"):
            spec, notes = fleet_at_percentile(spec, at, samples=args.at_samples)
    result = evaluate_fleet(spec, progress=_progress_printer())
    if notes:
        from dataclasses import replace

        result = replace(result, warnings=[f"designs enter at a percentile: {n}"
                                           for n in notes] + list(result.warnings))
    report = fleet_to_dict(result)
    if args.csv:
        write_atomic(args.csv, result.groups.to_csv(index=False), overwrite=args.force,
                     option="--csv")
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        render_fleet(report, _console(args))
    if args.csv:
        _wrote([args.csv])
    return _verdict_exit(args, report)


def _write_files(args, files: dict, figures=()) -> None:
    """Write ``files`` (path -> (text, option)) atomically, after checking that none of
    them, nor the ``figures`` still to come, exists (unless ``--force``): either every
    file of the run is written or none."""
    from .io.files import check_writable, write_atomic

    for path, (_, option) in files.items():
        check_writable([path], args.force, option)
    check_writable(figures, args.force, "--plots")
    for path, (text, option) in files.items():
        write_atomic(path, text, overwrite=args.force, option=option)


def _compare_outputs(args) -> dict[str, list[Path]]:
    """The files ``compare`` (or ``demo``) will write by option, as far as known before
    the run: checked before the solves so that an existing file fails fast."""
    from .report.plots import COMPARISON_FIGURES, figure_paths

    paths: dict[str, list[Path]] = {}
    if args.csv:
        out = Path(args.csv)
        # named as compare labels a candidate: its file's resolved name (a symlink's target)
        paths["--csv"] = [out / "designs.csv"] + [
            out / f"groups_{chr(ord('A') + k)}_{Path(d).resolve().stem}.csv"
            for k, d in enumerate(args.design)]
    if args.markdown:
        paths["--markdown"] = [Path(args.markdown)]
    if args.plots:
        paths["--plots"] = figure_paths(args.plots, COMPARISON_FIGURES)
    return paths


def cmd_compare(args) -> int:
    from .compare import compare as run_compare
    from .compare import comparison_table
    from .report import compare_markdown, compare_to_dict, render_compare
    from .report.plots import COMPARISON_FIGURES, figure_paths

    _folder_option(args.plots, "--plots")
    _folder_option(args.csv, "--csv")
    for option, paths in _compare_outputs(args).items():
        _outputs_free(args, paths, option)
    if args.plots:
        from .report.plots import require_matplotlib

        require_matplotlib()
    _engine_ready()
    at = None
    if getattr(args, "at", None) is not None:
        from .spread.study import parse_percentile

        at = parse_percentile(args.at, file=args.fleet)
    cmp = run_compare(args.fleet, args.design, args.years, args.rate, args.escalation,
                      progress=_progress_printer("candidate"), at=at,
                      at_samples=getattr(args, "at_samples", 100))
    report = compare_to_dict(cmp)
    files: dict[Path, tuple[str, str]] = {}  # path -> (text, option)
    written = []
    if args.csv:
        out = Path(args.csv)
        files[out / "designs.csv"] = (comparison_table(cmp).to_csv(index=False), "--csv")
        for x, c in zip(report["designs"], cmp.candidates, strict=True):
            files[out / f"groups_{x['letter']}_{x['design']}.csv"] = (
                c.fleet.groups.to_csv(index=False), "--csv")
        written.append(f"{out / 'designs.csv'} and {len(cmp.candidates)} per-group "
                       f"tables in {out}")
    if args.markdown:
        files[Path(args.markdown)] = (compare_markdown(report), "--markdown")
        written.append(args.markdown)
    _write_files(args, files, figures=figure_paths(args.plots, COMPARISON_FIGURES)
                 if args.plots else [])
    if args.plots:
        from .report.plots import comparison_figures

        figs = comparison_figures(cmp, args.plots, overwrite=args.force) or []
        written.append(f"{len(figs)} figure file(s) in {args.plots}")
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        render_compare(report, _console(args))
    _wrote(written)
    return _verdict_exit(args, report)


def cmd_spread(args) -> int:
    import contextlib

    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeRemainingColumn

    from .executors import dask_executor, local_executor
    from .io.design_file import load_design
    from .report.spread import render_spread, spread_figures, spread_to_dict
    from .spread.study import plan_spread, run_ageing, run_spread
    from .spread.tolerance import mains_band_spreads

    _folder_option(args.plots, "--plots")
    if args.plots:
        from .report.plots import figure_paths, require_matplotlib
        from .report.spread import SPREAD_FIGURES

        _outputs_free(args, figure_paths(args.plots, SPREAD_FIGURES), "--plots")
        require_matplotlib()
    design = load_design(args.design)
    band = None
    if args.mains_band:
        volt, _, freq = args.mains_band.partition(",")
        raw = {"voltage": volt.strip()} | ({"frequency": freq.strip()} if freq else {})
        band = mains_band_spreads(raw, design.mains.voltage, design.mains.frequency,
                                  file=args.design, key="--mains-band")
    err = Console(stderr=True)
    progress = Progress("{task.description}", BarColumn(), MofNCompleteColumn(),
                        TimeRemainingColumn(), console=err, transient=True,
                        disable=not err.is_terminal)
    if args.dask or args.scheduler:
        runner = dask_executor(address=args.scheduler, n_workers=args.workers)
    else:
        runner = contextlib.nullcontext(local_executor)
    _engine_ready()
    with _status("solving the nominal design"):
        accuracy = {} if args.steps is None else {"samples_per_cycle": args.steps}
        plan = plan_spread(design, samples=args.samples, seed=args.seed, corners=args.corners,
                           mains_band=band, class_defaults=False if args.declared_only else None,
                           limits_file=args.limits, check_limits=not args.no_limits,
                           **accuracy)
    with runner as executor, progress:
        task = progress.add_task("units", total=plan.n)
        result = run_spread(plan, executor=executor, chunk_size=args.chunk,
                            progress=lambda done, n: progress.update(task, completed=done))
        if args.years is not None and not result.interrupted:
            atask = progress.add_task("ageing", total=plan.n)
            try:
                ageing = run_ageing(plan, args.years, executor=executor,
                                    chunk_size=args.chunk,
                                    progress=lambda d, n: progress.update(atask, completed=d,
                                                                          total=n))
                from dataclasses import replace

                result = replace(result, ageing=ageing)
            except KeyboardInterrupt:
                err.print("ageing interrupted: not reported")
    if result.interrupted:
        err.print(f"interrupted: reporting the {result.done} of {result.requested} samples "
                  "done so far")
    report = spread_to_dict(result)
    if args.plots and result.done:
        _wrote(spread_figures(result, args.plots, overwrite=args.force))
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        render_spread(report, _console(args))
    return EXIT_INTERRUPTED if result.interrupted else _verdict_exit(args, report)


def cmd_line(args) -> int:
    from .product_line import run_line
    from .report import line as L
    from .report.plots import figure_paths

    _folder_option(args.plots, "--plots")
    _folder_option(args.csv, "--csv")
    figures = figure_paths(args.plots, L.LINE_FIGURES) if args.plots else []
    for option, paths in (("--csv", [Path(args.csv) / n for n in L.LINE_TABLES] if args.csv
                           else []),
                          ("--markdown", [args.markdown] if args.markdown else []),
                          ("--plots", figures)):
        _outputs_free(args, paths, option)  # fail fast: before the solves
    if args.plots:
        from .report.plots import require_matplotlib

        require_matplotlib()
    _engine_ready()
    result = run_line(args.line, progress=_progress_printer("design on mains"))
    report = L.line_to_dict(result)
    files: dict[Path, tuple[str, str]] = {}
    written = []
    if args.csv:
        out = Path(args.csv)
        tables = L.line_tables(result)
        for name, df in tables.items():
            files[out / name] = (df.to_csv(index=False), "--csv")
        written.append(f"{len(tables)} tables in {out}")
    if args.markdown:
        files[Path(args.markdown)] = (L.line_markdown(report), "--markdown")
        written.append(args.markdown)
    _write_files(args, files, figures)
    if args.plots:
        figs = L.line_figures(report, args.plots, overwrite=args.force)
        written.append(f"{len(figs)} figure file(s) in {args.plots}")
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        L.render_line(report, _console(args))
    _wrote(written)
    if getattr(args, "strict", False):
        failing = [p for p in report["pairs"] if p["failed_checks"]]
        if failing:
            print(f"fleetpower: --strict: {len(failing)} model x market pair(s) fail a check, "
                  f"the first {failing[0]['model']} in {failing[0]['market']} (exit 1)",
                  file=sys.stderr)
            return EXIT_VERDICT
    return EXIT_OK


def cmd_demo(args) -> int:
    from ._resources import examples_dir

    ex = examples_dir()
    args.fleet = str(ex / DEMO_FLEET)
    args.design = [str(ex / d) for d in DEMO_DESIGNS]
    for name in ("years", "rate", "escalation"):
        setattr(args, name, None)
    for option, paths in _compare_outputs(args).items():  # before the banner
        _outputs_free(args, paths, option)
    console = _console(args)
    if not args.json:
        console.print(f"[bold]Demo:[/bold] the bundled scenario {DEMO_FLEET} with "
                      f"{len(DEMO_DESIGNS)} candidate supplies for its desk sensors "
                      f"(files in {ex})")
    return cmd_compare(args)


#: the bundled scenario `fleetpower demo` runs
DEMO_FLEET = "harbour-office.toml"
DEMO_DESIGNS = ("sensor-dropper-230.toml", "desk-sensor-dropper-lean.toml",
                "desk-sensor-smps-230.toml", "desk-sensor-transformer-230.toml")


_EPILOGS = {
    "unit": """example:
  fleetpower unit examples/nightlight-dropper.toml
  fleetpower unit examples/led-driver-40w.toml --state active --json > led.json
  fleetpower unit my-design.toml --limits my-rules.csv --strict || echo "a check failed"
""",
    "fleet": """example:
  fleetpower fleet examples/harbour-office.toml
  fleetpower fleet examples/harbour-office.toml --csv groups.csv --json > fleet.json
""",
    "compare": """example:
  cd examples && fleetpower compare harbour-office.toml \\
      --design sensor-dropper-230.toml --design desk-sensor-smps-230.toml \\
      --years 12 --rate 0.05 --markdown tender.md --plots figures/
""",
    "spread": """example:
  fleetpower spread examples/desk-sensor-dropper-lean.toml --samples 200 --years 10
  fleetpower spread my-design.toml --corners --json > corners.json
  fleetpower spread my-design.toml --samples 10000 --scheduler tcp://10.0.0.5:8786
""",
    "line": """example:
  fleetpower line examples/product-line/lantern-works-line.toml
  fleetpower line my-line.toml --csv out/ --markdown line.md --plots figures/
""",
    "demo": """example:
  fleetpower demo
  fleetpower demo --markdown demo.md --width 120
""",
    "limits": """example:
  fleetpower limits
  fleetpower limits iec61000-3-2-class-a
  fleetpower limits my-rules.csv      # check a limit file of your own
""",
}

_EXIT_CODES = """exit status:
  0 done; 1 a check failed (only with --strict); 2 bad input (one line names the
  file and key); 3 the solver refused (with the physical reason); 4 an internal
  error (run with --debug for the traceback); 130 interrupted; 141 the reader of
  the output stopped early (| head)
"""

_WIDTH_HELP = (f"width of the printed screen in columns, {WIDTH_MIN}..{WIDTH_MAX} "
               "(default: the terminal's)")
_DEBUG_HELP = "on an error, print Python's traceback too (for reporting a fault)"
_STRICT_HELP = "exit 1 when a check fails (limits, stresses, conductors), for scripts"
_FORCE_HELP = "overwrite files that already exist"


def _verb(sub, name: str, help_text: str) -> argparse.ArgumentParser:
    p = sub.add_parser(name, help=help_text, description=help_text[:1].upper() + help_text[1:]
                       + ".", epilog=_EPILOGS[name] + "\n" + _EXIT_CODES,
                       formatter_class=argparse.RawDescriptionHelpFormatter)
    # after the verb too; SUPPRESS keeps a `fleetpower --debug VERB` from being reset
    p.add_argument("--debug", action="store_true", default=argparse.SUPPRESS,
                   help=_DEBUG_HELP)
    return p


def _add_outputs(p) -> None:
    p.add_argument("--json", action="store_true", help="print one JSON object instead")
    p.add_argument("--csv", metavar="DIR", help="write per-design and per-group tables here")
    p.add_argument("--markdown", metavar="FILE", help="write a report for a tender file")
    p.add_argument("--plots", metavar="DIR", help="write figures (needs fleetpower[plot])")
    p.add_argument("--width", type=_width, metavar="N", help=_WIDTH_HELP)
    p.add_argument("--strict", action="store_true",
                   help="exit 1 when no candidate is free of failed checks, for scripts")
    p.add_argument("--force", action="store_true", help=_FORCE_HELP)


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="fleetpower",
        description="What a fleet of small always-on mains supplies really draws.",
        epilog="example:\n  fleetpower demo\n  fleetpower unit examples/nightlight-dropper.toml"
               "\n  fleetpower VERB --help      # each verb's options and a worked example\n\n"
               + _EXIT_CODES,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("--version", action="version", version=f"fleetpower {__version__}",
                   help="print the version and exit")
    p.add_argument("--debug", action="store_true", help=_DEBUG_HELP)
    sub = p.add_subparsers(dest="command", required=True, metavar="VERB")
    u = _verb(sub, "unit", "simulate one supply to periodic steady state")
    u.add_argument("design", help="design file (TOML)")
    u.add_argument("--state", help="analyse only this operating state")
    u.add_argument("--json", action="store_true", help="print one JSON object instead")
    u.add_argument("--limits", metavar="FILE",
                   help="an extra limit-set file (CSV) to check against")
    u.add_argument("--width", type=_width, metavar="N", help=_WIDTH_HELP)
    u.add_argument("--strict", action="store_true", help=_STRICT_HELP)
    u.add_argument("--waveform-csv", metavar="FILE",
                   help="write each state's waveform (one cycle repeated over the IEC "
                        "61000-4-7 window) as a capture file a measured design can read; "
                        "several states go to FILE-<state>")
    u.add_argument("--force", action="store_true", help=_FORCE_HELP)
    u.set_defaults(func=cmd_unit)
    fl = _verb(sub, "fleet", "what a whole deployment draws and costs")
    fl.add_argument("fleet", help="fleet file (TOML)")
    fl.add_argument("--json", action="store_true", help="print one JSON object instead")
    fl.add_argument("--csv", metavar="OUT", help="write the per-group table to this CSV file")
    fl.add_argument("--force", action="store_true", help=_FORCE_HELP)
    fl.add_argument("--width", type=_width, metavar="N", help=_WIDTH_HELP)
    fl.add_argument("--strict", action="store_true", help=_STRICT_HELP)
    fl.add_argument("--at", metavar="P95",
                    help="each design enters as the unit at this percentile of its own "
                         "spread of input power (see `spread`), not at its nominals")
    fl.add_argument("--at-samples", type=int, default=100, metavar="N",
                    help="units drawn per design for --at (default 100)")
    fl.set_defaults(func=cmd_fleet)
    cp = _verb(sub, "compare", "candidate designs over the same fleet's life")
    cp.add_argument("fleet", help="fleet file (TOML)")
    cp.add_argument("--design", action="append", required=True, metavar="DESIGN.toml",
                    help="a candidate design (repeat); it replaces designs of its role")
    cp.add_argument("--years", type=int, help="service life [years] (default 10)")
    cp.add_argument("--rate", type=float, help="discount rate per year, e.g. 0.05")
    cp.add_argument("--escalation", type=float, help="energy price escalation per year")
    cp.add_argument("--at", metavar="P95",
                    help="each design enters as the unit at this percentile of its own "
                         "spread of input power (see `spread`), not at its nominals")
    cp.add_argument("--at-samples", type=int, default=100, metavar="N",
                    help="units drawn per design for --at (default 100)")
    _add_outputs(cp)
    cp.set_defaults(func=cmd_compare)
    sp = _verb(sub, "spread", "a production run: part tolerances, the mains band, ageing")
    sp.add_argument("design", help="design file (TOML), tolerances declared beside values")
    sp.add_argument("--samples", type=int, default=500, metavar="N",
                    help="Monte Carlo units (default 500)")
    sp.add_argument("--seed", type=int, default=0, metavar="S", help="run seed (default 0)")
    sp.add_argument("--corners", action="store_true",
                    help="every extreme combination instead of random units")
    sp.add_argument("--years", type=int, metavar="Y",
                    help="age the series capacitor and report years 0..Y")
    sp.add_argument("--mains-band", metavar="'V %,F %'",
                    help="mains band of this run, e.g. '10 %%,1 %%' (default: the design's)")
    sp.add_argument("--declared-only", action="store_true",
                    help="vary only declared tolerances (no part-class defaults)")
    sp.add_argument("--dask", action="store_true",
                    help="run the batches on a local Dask cluster (needs fleetpower[dask])")
    sp.add_argument("--scheduler", metavar="ADDRESS",
                    help="run the batches on this Dask scheduler, e.g. tcp://host:8786")
    sp.add_argument("--workers", type=int, default=2, metavar="N",
                    help="workers of the local Dask cluster (default 2)")
    sp.add_argument("--chunk", type=int, default=128, metavar="N",
                    help="units solved per batch (default 128)")
    sp.add_argument("--steps", type=int, default=None, metavar="N",
                    help="steps per mains cycle of each unit's solve, the accuracy setting "
                         "(default 256: worst error 0.36 %% of I rms against the reference "
                         "tests, see DEVELOPERS.md; `unit` uses 2048)")
    sp.add_argument("--limits", metavar="FILE",
                    help="an extra limit-set file (CSV) to check every unit against")
    sp.add_argument("--no-limits", action="store_true",
                    help="skip the limit sets per unit (stresses and regulation still checked)")
    sp.add_argument("--plots", metavar="DIR", help="write percentile plots (fleetpower[plot])")
    sp.add_argument("--force", action="store_true", help=_FORCE_HELP)
    sp.add_argument("--json", action="store_true", help="print one JSON object instead")
    sp.add_argument("--strict", action="store_true",
                    help="exit 1 when any unit of the run fails a check, or (with --years) "
                         "the P5 unit stops powering its load, for scripts")
    sp.add_argument("--width", type=_width, metavar="N", help=_WIDTH_HELP)
    sp.set_defaults(func=cmd_spread)
    ln = _verb(sub, "line", "a product line: every model on every market's mains and rules")
    ln.add_argument("line", help="product-line file (TOML)")
    ln.add_argument("--json", action="store_true", help="print one JSON object instead")
    ln.add_argument("--csv", metavar="DIR",
                    help="write the per-pair, per-check and installed-base tables here")
    ln.add_argument("--markdown", metavar="FILE", help="write the report as Markdown")
    ln.add_argument("--plots", metavar="DIR",
                    help="write the headroom matrix and installed-base energy figures "
                         "(needs fleetpower[plot])")
    ln.add_argument("--force", action="store_true", help=_FORCE_HELP)
    ln.add_argument("--width", type=_width, metavar="N", help=_WIDTH_HELP)
    ln.add_argument("--strict", action="store_true",
                    help="exit 1 when any model x market pair fails a check, for scripts")
    ln.set_defaults(func=cmd_line)
    dm = _verb(sub, "demo", "run the bundled scenario end to end")
    _add_outputs(dm)
    dm.set_defaults(func=cmd_demo)
    lim = _verb(sub, "limits", "list the shipped limit sets, or show one")
    lim.add_argument("set", nargs="?", help="a set id, or a limit file (CSV) to check")
    lim.add_argument("--json", action="store_true", help="print JSON records instead")
    lim.add_argument("--width", type=_width, metavar="N", help=_WIDTH_HELP)
    lim.set_defaults(func=cmd_limits)
    return p


def _quiet_stdout() -> None:
    """Point the process's stdout at the null device, so that the interpreter's last
    flush of what is still buffered cannot fail a second time (a closed pipe)."""
    try:
        fd = os.open(os.devnull, os.O_WRONLY)
        os.dup2(fd, sys.stdout.fileno())
        os.close(fd)
    except (AttributeError, OSError, ValueError):  # stdout without a file descriptor
        pass


def _fail(args, code: int, line: str) -> int:
    """One line on stderr (and, with --debug, the traceback above it); ``code``."""
    if getattr(args, "debug", False):
        import traceback

        traceback.print_exc(file=sys.stderr)
    print(f"fleetpower: {line}", file=sys.stderr)
    return code


#: verbs whose work is small and bounded: the cyclic garbage collector stays off for the
#: whole run. Their imports create long-lived objects by the hundred thousand, and the
#: collector spent ~0.19 s of a 1.4 s ``unit`` run (CPU) rescanning them; what it would
#: free in a quick verb is a few thousand objects. Plain reference counting still frees
#: everything else. The other verbs (fleets, spreads, comparisons) keep it on.
QUICK_VERBS = ("unit", "limits")


def main(argv: list[str] | None = None) -> int:
    """Parse ``argv``, run the verb and return the exit status; never a traceback unless
    ``--debug`` asks for one.

    The garbage collector is off while parsing and, for :data:`QUICK_VERBS`, for the
    whole verb; its state is restored on return (a caller running many verbs in one
    process keeps its collector).
    """
    collecting = gc.isenabled()
    gc.disable()
    try:
        args = build_parser().parse_args(argv)
        if collecting and args.command not in QUICK_VERBS:
            gc.enable()
        return _run_verb(args)
    finally:
        if collecting:
            gc.enable()


def _run_verb(args) -> int:
    """Run the parsed verb: one line and an exit status for whatever it raises."""
    try:
        return args.func(args)
    except InputError as exc:
        return _fail(args, EXIT_INPUT, exc.one_line())
    except SolverError as exc:
        return _fail(args, EXIT_SOLVER, f"solver: {printable(str(exc))}")
    except FleetpowerError as exc:  # pragma: no cover - defensive
        return _fail(args, EXIT_INPUT, printable(str(exc)))
    except KeyboardInterrupt:
        return _fail(args, EXIT_INTERRUPTED, "interrupted")
    except BrokenPipeError:  # the reader went away (`| head`): nothing more to say
        _quiet_stdout()
        return EXIT_CLOSED_PIPE
    except Exception as exc:  # a fault of the program: one line, the traceback on --debug
        what = type(exc).__name__ + (f": {printable(str(exc))[:300]}" if str(exc) else "")
        return _fail(args, EXIT_INTERNAL,
                     f"internal error: {what} (run with --debug for the traceback)")


def run() -> None:  # pragma: no cover - the console script; exits the process
    """Run :func:`main` and leave without tearing the interpreter down.

    Output is flushed and atexit handlers run first, so nothing printed or written is
    lost; what is skipped is the module teardown and garbage collection of numba's and
    pandas' objects, which took longer than a quick command itself.
    """
    global _OWN_PROCESS
    _OWN_PROCESS = True
    code = main()
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except (BrokenPipeError, OSError):  # a reader that stopped early (| head)
        pass
    import atexit

    atexit._run_exitfuncs()
    os._exit(code)


if __name__ == "__main__":  # pragma: no cover
    run()
