"""`foldsim study`: every net of a shape through the whole check, on Dask; rank, pick, plot."""

import json
import sys
import time
from pathlib import Path

from ..errors import FoldsimError, ModelError


def register(sub):
    """Add the `study` subcommand to an argparse subparsers object."""
    study = sub.add_parser(
        "study", help="run every net of a shape (or a sample) through the whole check and rank them",
        description="With a SHAPE and -o STUDY: unfold and gear every net of the shape (or a sample), check "
                    "each over its whole motion and write one row per net to STUDY/nets.parquet, on a local "
                    "Dask cluster by default. With an existing STUDY: rank its nets, pick one, plot the front.")
    study.add_argument("target", metavar="SHAPE|STUDY",
                       help="a built-in solid or a mesh file (runs a study), or a study directory (ranks it)")
    study.add_argument("-o", "--output", default=None, metavar="OUT",
                       help="the study directory to write; with --pick, the .mech.json file to write")
    run = study.add_argument_group("running a study")
    run.add_argument("--nets", default="all", metavar="all|sample:N",
                     help="every net up to symmetry (default), or N spanning trees drawn uniformly "
                          "(Wilson's algorithm) with symmetric duplicates removed")
    run.add_argument("--seed", type=int, default=0, metavar="S", help="seed of --nets sample:N (default 0)")
    run.add_argument("--size", type=float, default=None, metavar="S",
                     help="edge length of a built-in solid in model units (default 1), as for foldsim new")
    run.add_argument("--units", default="mm", help="model units (default mm); the play presets are in mm")
    run.add_argument("--gears", choices=("auto", "simple"), default="auto",
                     help="gear layout, as for foldsim new (default auto)")
    run.add_argument("--process", default="sintered-nylon", metavar="NAME",
                     help="play preset of the stack-up: sintered-nylon (default), filament or machined-metal")
    run.add_argument("--mc", type=int, default=0, metavar="N",
                     help="also run a Monte Carlo play stack-up of N samples per net (p95_gap); off by default")
    run.add_argument("--chunk", type=int, default=None, metavar="N",
                     help="nets per unit of work (default: up to 25, at least 16 chunks)")
    run.add_argument("--scheduler", default="local", metavar="ADDRESS",
                     help="'local' (default: a Dask cluster on this machine), 'none' (serial, in this process) "
                          "or the address of a running dask.distributed scheduler, e.g. tcp://10.0.0.5:8786")
    run.add_argument("--workers", type=int, default=None, metavar="N",
                     help="worker processes of the local cluster (default: one per core)")
    run.add_argument("--resume", action="store_true",
                     help="continue the study in OUT: skip the chunks already written")
    run.add_argument("--csv", action="store_true", help="also write STUDY/nets.csv")
    choose = study.add_argument_group("choosing a net")
    choose.add_argument("--rank", default=None, metavar="CRITERIA",
                        help="comma-separated criteria, most important first (default: collision_free, "
                             "worst_case_gap (p95_gap with --mc), part_types, diameter)")
    choose.add_argument("--top", type=int, default=10, metavar="K", help="nets to list (default 10)")
    choose.add_argument("--pick", type=int, default=None, metavar="NET",
                        help="write net NET (the 'net' column) as a geared mechanism file to -o")
    choose.add_argument("--plot", default=None, metavar="FILE",
                        help="draw two criteria (--axes) of every net with their Pareto front (PNG, SVG, PDF)")
    choose.add_argument("--axes", default=None, metavar="X,Y",
                        help="the plot's criteria (default diameter and worst_case_gap, p95_gap with --mc)")
    study.add_argument("--json", action="store_true",
                       help="print a JSON summary (and no progress bar): nets evaluated, failed, the Pareto "
                            "front's size, the best net per criterion, the top nets")
    study.set_defaults(run=run_command)


class _Bar:
    """A progress bar with rate and ETA on a stream; on a non-terminal, a line per tenth."""

    def __init__(self, stream, visible):
        self.stream, self.visible = stream, visible
        self.start = None
        self.shown_tenth = -1
        self.open = False

    def __call__(self, done, total):
        if self.start is None or done == 0:
            self.start = time.perf_counter()
        if not self.visible or total == 0:
            return
        elapsed = time.perf_counter() - self.start
        rate = done / elapsed if elapsed > 0 and done else 0.0
        eta = (total - done) / rate if rate else float("nan")
        width = 24
        filled = int(width * done / total)
        text = (f"nets {done:,}/{total:,} [{'#' * filled}{'.' * (width - filled)}] "
                f"{rate:.1f} nets/s, ETA {_duration(eta)}")
        if self.stream.isatty():
            print(f"\r{text}\033[K", end="", file=self.stream, flush=True)
            self.open = True
        elif done * 10 // total > self.shown_tenth:
            self.shown_tenth = done * 10 // total
            print(text, file=self.stream, flush=True)

    def finish(self):
        if self.open:
            print(file=self.stream, flush=True)
            self.open = False


def _duration(seconds):
    if seconds != seconds:
        return "--"
    seconds = int(round(seconds))
    if seconds < 60:
        return f"{seconds} s"
    if seconds < 3600:
        return f"{seconds // 60} min {seconds % 60:02d} s"
    return f"{seconds // 3600} h {seconds // 60 % 60:02d} min"


def _spec(args):
    from ..stackup import PROCESSES
    from ..study.evaluate import StudySpec

    if args.process not in PROCESSES:
        raise FoldsimError(f"--process: unknown preset {args.process!r}; choose from {', '.join(PROCESSES)}")
    if args.mc < 0:
        raise FoldsimError(f"--mc: must be a non-negative number of samples, not {args.mc}")
    if args.size is not None and not 0 < args.size < float("inf"):
        raise FoldsimError(f"--size: must be a positive finite length, not {args.size}")
    shape = args.target
    if Path(shape).suffix or Path(shape).is_file():
        shape = str(Path(shape).resolve())
    return StudySpec(shape=shape, size=args.size, units=args.units, gears=args.gears, process=args.process,
                     mc=args.mc)


def _same_plan(plan, spec, args):
    from dataclasses import asdict

    asked = {"spec": asdict(spec), "nets": args.nets.strip().lower(), "seed": args.seed}
    for key, value in asked.items():
        if plan.get(key) != value:
            raise FoldsimError(f"--resume: {args.output} was started with {key} {plan.get(key)!r}, not {value!r}; "
                               "give the same options, or choose another -o")


def _start(args):
    """Plan (or find) the study in -o and run what is left of it; returns the study path."""
    from ..study import table
    from ..study.run import make_plan, parse_nets

    if args.output is None:
        raise FoldsimError("-o: give the study directory to write, e.g. -o cube-study")
    parse_nets(args.nets)
    if args.workers is not None and args.workers < 1:
        raise FoldsimError(f"--workers: must be at least 1, not {args.workers}")
    if args.chunk is not None and args.chunk < 1:
        raise FoldsimError(f"--chunk: must be at least 1 net, not {args.chunk}")
    if args.workers is not None and args.scheduler.lower() not in ("local", "none"):
        raise FoldsimError("--workers: sets the size of the local cluster; an existing cluster keeps its own")
    spec = _spec(args)
    out = Path(args.output)
    if table.is_study(out):
        if not args.resume:
            raise FoldsimError(f"-o: {out} already holds a study; give --resume to continue it, or another -o")
        _same_plan(table.read_plan(out), spec, args)
    else:
        if out.exists() and (not out.is_dir() or any(out.iterdir())):
            raise FoldsimError(f"-o: {out} exists and is not a study; choose a new directory")
        plan = make_plan(spec, args.nets, args.seed, args.chunk)
        plan["csv"] = bool(args.csv)
        table.write_plan(out, plan)
    _run(out, args)
    return out


def _run(out, args):
    from ..study.run import run_study

    bar = _Bar(sys.stderr, not args.json)
    try:
        stats = run_study(out, scheduler=args.scheduler, workers=args.workers, progress=bar)
    finally:
        bar.finish()
    return stats


def _format_rows(rows, names, top):
    head = f" {'net':>6}  {'ok':<3}  " + "  ".join(f"{n:>14}" for n in names) + "  cuts"
    lines = [head]
    for r in rows[:top]:
        if r["error"] is not None:
            lines.append(f" {r['net']:>6}  -    failed: {r['error']}")
            continue
        cells = [f"{_cell(r[n]):>14}" for n in names]
        lines.append(f" {r['net']:>6}  {'yes' if r['ok'] else 'no':<3}  " + "  ".join(cells) + f"  {r['cuts']}")
    return lines


def _cell(value):
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    return format(value, ".4g")


def _pick(study, rows, args):
    from ..design import build, shape_args
    from ..io.mechanism_json import save
    from ..study import table

    if args.output is None:
        raise FoldsimError("-o: give the .mech.json file to write the picked net to")
    by_net = {r["net"]: r for r in rows}
    if args.pick not in by_net:
        raise FoldsimError(f"--pick: the study has no net {args.pick} (nets 0..{len(rows) - 1})")
    row = by_net[args.pick]
    if row["error"] is not None:
        raise FoldsimError(f"--pick: net {args.pick} could not be evaluated: {row['error']}")
    spec = table.plan_spec(table.read_plan(study))
    mech, _ = build(shape_args(spec.shape, spec.size, spec.units, cut=row["cuts"] or None, root=row["root"],
                               gears=spec.gears))
    mech = _named(mech, f"{mech.name} net {args.pick}")
    try:
        save(mech, args.output)
    except OSError as exc:
        raise ModelError(f"{args.output}: cannot write file: {exc.strerror or exc}") from None
    return str(args.output)


def _named(mech, name):
    from dataclasses import replace

    return replace(mech, name=name)


def run_command(args):
    from ..study import table

    if args.top < 1:
        raise FoldsimError(f"--top: must be at least 1, not {args.top}")
    target = Path(args.target)
    if table.is_study(target) and not args.resume:
        study = target
        if args.output is not None and args.pick is None:
            raise FoldsimError("-o: with an existing study, -o is the file that --pick writes; give --pick NET")
    elif table.is_study(target):
        study = target
        _run(study, args)
    else:
        if args.pick is not None:
            raise FoldsimError(f"--pick: {args.target} is not a study directory (no study.json)")
        study = _start(args)
    return _report(study, args)


def _report(study, args):
    from ..study import table
    from ..study.plot import parse_axes, plot_front
    from ..study.rank import DEFAULT_RANK, parse_criteria, pareto_front, ranked, summary

    plan = table.read_plan(study)
    rows = table.read_table(study)
    mc = table.plan_spec(plan).mc
    default = DEFAULT_RANK.replace("worst_case_gap", "p95_gap") if mc else DEFAULT_RANK
    names = parse_criteria(args.rank or default, rows)
    order = ranked(rows, names)
    front = pareto_front(rows, names)
    result = {"study": str(study), "shape": plan["shape"], **summary(rows, names),
              "missing": len(plan["trees"]) - len(rows)}
    result["top"] = [{k: r[k] for k in ("net", "ok", *names, "cuts", "root")} for r in order[:args.top]]
    result["front"] = [r["net"] for r in front]
    if args.pick is not None:
        result["picked"] = {"net": args.pick, "file": _pick(study, rows, args)}
    if args.plot is not None:
        axes = parse_axes(args.axes or ("diameter,p95_gap" if mc else "diameter,worst_case_gap"))
        plot_front(rows, *axes, args.plot, title=f"{plan['shape']}: {len(rows)} nets")
        result["plot"] = {"file": str(args.plot), "axes": list(axes)}
    if args.json:
        print(json.dumps(result, indent=2))
        return 0
    lines = [f"{plan['shape']} study {study}: {result['nets']:,} nets, {result['evaluated']:,} evaluated, "
             f"{result['failed']:,} failed" + (f", {result['missing']:,} not yet run" if result["missing"] else ""),
             f"ranked by {', '.join(names)}; Pareto front: {result['pareto_front']} nets "
             f"({', '.join(map(str, result['front'][:12]))}{', ...' if len(front) > 12 else ''})"]
    lines += _format_rows(order, names, args.top)
    for name, best in result["best"].items():
        lines.append(f"best {name}: net {best['net']} ({best['value']})")
    if "picked" in result:
        lines.append(f"net {args.pick} written to {result['picked']['file']}")
    if "plot" in result:
        lines.append(f"plot written to {args.plot}")
    print("\n".join(lines))
    return 0
