"""`foldsim stackup`: how big the closure gaps get with real hinge play and gear backlash."""

import json

from ..errors import FoldsimError
from ..limits import DEFAULT_SAMPLES, DEFAULT_TIMES

PROCESS_HELP = "sintered-nylon, filament or machined-metal (common-practice presets; docs/stackup.md)"


def register(sub):
    """Add the `stackup` subcommand to an argparse subparsers object."""
    cmd = sub.add_parser("stackup", help="closure gaps and panel wobble from hinge play and gear backlash",
                         description="Sample the mechanism as built, with every hinge's play and every gear "
                                     "mesh's backlash, and report the closure gap of every cut edge "
                                     "(median, 95th percentile, maximum, linearised worst case), how far "
                                     "each panel wanders, and which hinges and meshes to tighten first.")
    cmd.add_argument("model", help="a .mech.json file")
    cmd.add_argument("--samples", type=int, default=DEFAULT_SAMPLES, metavar="N",
                     help=f"Monte Carlo samples (default {DEFAULT_SAMPLES:,})")
    cmd.add_argument("--seed", type=int, default=0, metavar="S", help="random seed (default 0)")
    cmd.add_argument("--process", default=None, metavar="NAME",
                     help=f"process preset, replacing the one the file names: {PROCESS_HELP}")
    cmd.add_argument("--dist", choices=("uniform", "normal"), default="uniform",
                     help="each error uniform within its ± bound, or normal with the bound at 3 sigma")
    cmd.add_argument("--t", dest="times", default=",".join(f"{t:g}" for t in DEFAULT_TIMES), metavar="LIST",
                     help="drive values to analyse, comma-separated (t = 1, closure, is always included)")
    cmd.add_argument("--compare", nargs="+", default=None, metavar="MODEL",
                     help="also run these candidate nets or gear layouts and print them side by side")
    cmd.add_argument("--json", action="store_true", help="print the report as one JSON document")
    cmd.set_defaults(run=run)


def _times(text):
    try:
        values = [float(x) for x in text.split(",") if x.strip()]
    except ValueError:
        raise FoldsimError(f"--t: must be comma-separated numbers, not {text!r}") from None
    for t in values:
        if not -1.0 <= t <= 1.0:
            raise FoldsimError(f"--t: drive values must lie in [-1, 1], not {t:g}")
    return values


def check_options(samples, process):
    """Validate the options `stackup` shares with `check`."""
    from ..stackup import PROCESSES

    if samples < 1:
        raise FoldsimError(f"--samples: must be a positive integer, not {samples}")
    if process is not None and process not in PROCESSES:
        raise FoldsimError(f"--process: unknown process {process!r} (known: {', '.join(PROCESSES)})")


def _with_stops(mech, process):
    """The play bounds, with the hinge stops of the file's ``build`` object (docs/build.md) when it has one."""
    from dataclasses import replace

    import numpy as np

    from ..build.spec import build_spec
    from ..stackup import play_spec

    build = build_spec(mech)
    if build is None:
        return None, None
    spec = replace(play_spec(mech, process), stops=build.stops)
    return spec, [float(x) for x in np.degrees(build.stops)]


def run(args):
    from ..io.mechanism_json import load
    from ..stackup import compare, format_comparison, format_report, stackup

    check_options(args.samples, args.process)
    times = _times(args.times)
    mech = load(args.model)
    spec, stops = _with_stops(mech, args.process)
    result = stackup(mech, spec=spec, process=args.process, samples=args.samples, seed=args.seed,
                     dist=args.dist, times=times)
    report = result.to_dict()
    if stops is not None:
        report["stops_deg"] = stops
    if args.compare:
        mechs = [mech] + [load(path) for path in args.compare]
        names = [args.model] + list(args.compare)
        report["comparison"] = compare(mechs, names=names, process=args.process, samples=args.samples,
                                       seed=args.seed, dist=args.dist)
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        text = format_report(report)
        if args.compare:
            text += "\n\ncandidates side by side (closure, t = 1):\n" + format_comparison(
                report["comparison"], mech.units)
        print(text)
    return 0
