"""Command line: parses, calls the library, renders. Nothing else lives here."""

from __future__ import annotations

import argparse
import json
import sys

from rich.console import Console

from .errors import FleetpowerError, InputError, SolverError

EXIT_INPUT = 2
EXIT_SOLVER = 3


def _console(args) -> Console:
    return Console(width=getattr(args, "width", None) or None, highlight=False)


def _status(message: str):
    """A spinner on stderr while the engine works (silent when stderr is not a terminal)."""
    return Console(stderr=True).status(message, spinner="line")


def cmd_unit(args) -> int:
    from .io.design_file import load_design
    from .report import render_unit, unit_to_dict
    from .unit import analyse_unit

    design = load_design(args.design)
    if args.limits:  # read the user's limit file before the (longer) solve
        from .limits.tables import load_limit_set

        load_limit_set(args.limits)
    states = [args.state] if args.state else None
    if args.state and args.state not in design.states:
        from .errors import suggest

        raise InputError(args.design, "--state",
                         f"unknown state {args.state!r}{suggest(args.state, design.states)}")
    with _status(f"solving {design.name} to periodic steady state"):
        analysis = analyse_unit(design, states, limits_file=args.limits)
    report = unit_to_dict(analysis)
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        render_unit(report, _console(args))
    return 0


def cmd_limits(args) -> int:
    from rich.table import Table

    from . import limits as L

    console = _console(args)
    if args.set is None:
        df = L.list_limit_sets()
        t = Table(title="Limit sets shipped (data/limits/)", title_justify="left")
        for col in ("set", "title", "edition", "clause", "provenance", "rows"):
            t.add_column(col, overflow="fold")
        for row in df.itertuples(index=False):
            t.add_row(*[str(getattr(row, c)) for c in ("set", "title", "edition", "clause",
                                                        "provenance", "rows")])
        if args.json:
            print(df.to_json(orient="records", indent=2))
        else:
            console.print(t)
        return 0
    df = L.load_limit_set(args.set)
    if args.json:
        print(df.to_json(orient="records", indent=2))
        return 0
    cols = [c for c in ("quantity", "harmonic", "limit", "unit", "kind", "direction",
                        "applies_from_w", "applies_to_w", "clause", "provenance", "note")
            if c in df.columns]
    t = Table(title=f"Limit set {args.set}", title_justify="left")
    for c in cols:
        t.add_column(c, overflow="fold")
    for row in df[cols].itertuples(index=False):
        t.add_row(*["" if (isinstance(v, float) and v != v) else str(v) for v in row])
    console.print(t)
    return 0


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

    spec = load_fleet(args.fleet)
    result = evaluate_fleet(spec, progress=_progress_printer())
    report = fleet_to_dict(result)
    if args.csv:
        write_atomic(args.csv, result.groups.to_csv(index=False))
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        render_fleet(report, _console(args))
    return 0


def cmd_compare(args) -> int:
    from .compare import compare as run_compare
    from .compare import comparison_table
    from .io.files import write_atomic
    from .report import compare_markdown, compare_to_dict, render_compare

    if args.plots:
        from .report.plots import require_matplotlib

        require_matplotlib()
    cmp = run_compare(args.fleet, args.design, args.years, args.rate, args.escalation,
                      progress=_progress_printer("candidate"))
    report = compare_to_dict(cmp)
    if args.csv:
        from pathlib import Path

        out = Path(args.csv)
        write_atomic(out / "designs.csv", comparison_table(cmp).to_csv(index=False))
        for x, c in zip(report["designs"], cmp.candidates, strict=True):
            write_atomic(out / f"groups_{x['letter']}_{x['design']}.csv",
                         c.fleet.groups.to_csv(index=False))
    if args.markdown:
        write_atomic(args.markdown, compare_markdown(report))
    if args.plots:
        from .report.plots import comparison_figures

        comparison_figures(cmp, args.plots)
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        render_compare(report, _console(args))
    return 0


def cmd_demo(args) -> int:
    from ._resources import examples_dir

    ex = examples_dir()
    args.fleet = str(ex / DEMO_FLEET)
    args.design = [str(ex / d) for d in DEMO_DESIGNS]
    for name in ("years", "rate", "escalation"):
        setattr(args, name, None)
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


def _add_outputs(p) -> None:
    p.add_argument("--json", action="store_true", help="print one JSON object instead")
    p.add_argument("--csv", metavar="DIR", help="write per-design and per-group tables here")
    p.add_argument("--markdown", metavar="FILE", help="write a report for a tender file")
    p.add_argument("--plots", metavar="DIR", help="write figures (needs fleetpower[plot])")
    p.add_argument("--width", type=int)


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="fleetpower",
        description="What a fleet of small always-on mains supplies really draws.",
    )
    sub = p.add_subparsers(dest="command", required=True)
    u = sub.add_parser("unit", help="simulate one supply to periodic steady state")
    u.add_argument("design", help="design file (TOML)")
    u.add_argument("--state", help="analyse only this operating state")
    u.add_argument("--json", action="store_true", help="print one JSON object instead")
    u.add_argument("--limits", help="an extra limit-set file (CSV) to check against")
    u.add_argument("--width", type=int, help="terminal width in columns")
    u.set_defaults(func=cmd_unit)
    fl = sub.add_parser("fleet", help="what a whole deployment draws and costs")
    fl.add_argument("fleet", help="fleet file (TOML)")
    fl.add_argument("--json", action="store_true", help="print one JSON object instead")
    fl.add_argument("--csv", metavar="OUT", help="write the per-group table to this CSV file")
    fl.add_argument("--width", type=int)
    fl.set_defaults(func=cmd_fleet)
    cp = sub.add_parser("compare", help="candidate designs over the same fleet's life")
    cp.add_argument("fleet", help="fleet file (TOML)")
    cp.add_argument("--design", action="append", required=True, metavar="DESIGN.toml",
                    help="a candidate design (repeat); it replaces designs of its role")
    cp.add_argument("--years", type=int, help="service life [years] (default 10)")
    cp.add_argument("--rate", type=float, help="discount rate per year, e.g. 0.05")
    cp.add_argument("--escalation", type=float, help="energy price escalation per year")
    _add_outputs(cp)
    cp.set_defaults(func=cmd_compare)
    dm = sub.add_parser("demo", help="run the bundled scenario end to end")
    _add_outputs(dm)
    dm.set_defaults(func=cmd_demo)
    lim = sub.add_parser("limits", help="list the shipped limit sets, or show one")
    lim.add_argument("set", nargs="?", help="a set id, or a limit file (CSV) to check")
    lim.add_argument("--json", action="store_true")
    lim.add_argument("--width", type=int)
    lim.set_defaults(func=cmd_limits)
    return p


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.func(args)
    except InputError as exc:
        print(f"fleetpower: {exc.one_line()}", file=sys.stderr)
        return EXIT_INPUT
    except SolverError as exc:
        print(f"fleetpower: solver: {exc}", file=sys.stderr)
        return EXIT_SOLVER
    except FleetpowerError as exc:  # pragma: no cover - defensive
        print(f"fleetpower: {exc}", file=sys.stderr)
        return EXIT_INPUT


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
