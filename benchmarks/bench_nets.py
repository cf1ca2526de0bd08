"""Benchmark of net counting and listing.

    python benchmarks/bench_nets.py            # everything, including the 5,184,000-tree listings
    python benchmarks/bench_nets.py --quick    # skip the dodecahedron and icosahedron listings

Prints tables; asserts nothing about time. Exits 1 only if a count disagrees with
its published value (Buekenhout & Parker, Discrete Math. 186 (1998) 69-94, for the
Platonic solids; OEIS A103535 for the prisms) or with networkx.

Stages, per solid:

(a) symmetry group from the geometry (`symmetry_group`);
(b) spanning trees by the matrix-tree theorem (`number_of_spanning_trees`, exact
    integers) against `networkx.number_of_spanning_trees` (floating point);
(c) distinct nets by Burnside's lemma (`fixed_spanning_trees` over the group);
(d) listing every tree (`enumerate_spanning_trees`) against networkx's
    `SpanningTreeIterator` on the same graph (on the small solids only: networkx
    takes milliseconds per tree);
(e) the full census (`nets_up_to_symmetry`): every tree listed, one kept per orbit,
    diameters of the kept ones, with the diameter histogram printed.
"""

import argparse
import itertools
import sys
import time
from pathlib import Path

import networkx as nx

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from foldsim.netcount import (
    enumerate_spanning_trees,
    fixed_spanning_trees,
    nets_up_to_symmetry,
    number_of_spanning_trees,
)
from foldsim.nets import face_graph
from foldsim.solids import builtin
from foldsim.symmetry import symmetry_group

PUBLISHED = {  # distinct nets: Buekenhout & Parker 1998; OEIS A103535
    "tetrahedron": 2, "cube": 11, "octahedron": 11, "dodecahedron": 43_380, "icosahedron": 43_380,
    "prism:3": 9, "prism:5": 99, "prism:6": 354,
}
NETWORKX_LISTING = {"tetrahedron", "cube", "octahedron", "prism:3", "prism:5"}


def timed(fn, repeat=1):
    """(result, best wall time in seconds) of calling fn() ``repeat`` times."""
    best, result = float("inf"), None
    for _ in range(repeat):
        start = time.perf_counter()
        result = fn()
        best = min(best, time.perf_counter() - start)
    return result, best


def row(label, value, detail=""):
    print(f"{label:<38}{value:>14}  {detail}")


def bench(spec, full):
    poly = builtin(spec)
    graph = face_graph(poly.faces)
    failures = []
    print(f"== {spec}: {graph.number_of_nodes()} faces, {graph.number_of_edges()} shared edges ==")
    group, t = timed(lambda: symmetry_group(poly), 3)
    row("(a) symmetry group", f"{t * 1e3:.1f} ms", f"order {group.order}, {int(group.rotations.sum())} rotations")
    trees, t = timed(lambda: number_of_spanning_trees(graph), 3)
    reference, t_nx = timed(lambda: nx.number_of_spanning_trees(graph), 3)
    row("(b) matrix-tree, exact", f"{t * 1e3:.2f} ms", f"{trees:,} trees; networkx {t_nx * 1e3:.2f} ms "
        f"({reference:,.1f})")
    if trees != round(reference):
        failures.append(f"{spec}: {trees} spanning trees, networkx says {reference}")
    fixed, t = timed(lambda: fixed_spanning_trees(graph, group.edges), 3)
    nets = sum(fixed) // group.order
    row("(c) Burnside", f"{t * 1e3:.1f} ms", f"{nets:,} nets; non-identity elements fix {sum(fixed[1:]):,} trees")
    if nets != PUBLISHED.get(spec, nets):
        failures.append(f"{spec}: {nets} nets, published {PUBLISHED[spec]}")
    if spec in NETWORKX_LISTING:
        count, t = timed(lambda: sum(1 for _ in enumerate_spanning_trees(graph, limit=None)))
        count_nx, t_nx = timed(lambda: sum(1 for _ in nx.SpanningTreeIterator(graph)))
        row("(d) listing, foldsim", f"{t * 1e3:.1f} ms", f"{count:,} trees, {t / count * 1e6:.2f} us each")
        row("(d) listing, networkx iterator", f"{t_nx * 1e3:.1f} ms",
            f"{count_nx:,} trees; foldsim is {t_nx / t:.0f}x faster")
        if count != count_nx:
            failures.append(f"{spec}: listed {count} trees, networkx {count_nx}")
    elif full:
        count, t = timed(lambda: sum(1 for _ in enumerate_spanning_trees(graph, limit=None)))
        row("(d) listing, foldsim", f"{t:.2f} s", f"{count:,} trees, {t / count * 1e6:.2f} us each")
    if full or spec in NETWORKX_LISTING:
        census, t = timed(lambda: nets_up_to_symmetry(poly, limit=None))
        row("(e) census", f"{t:.2f} s", f"{len(census.representatives):,} representatives, "
            f"{census.spanning_trees / t / 1e6:.2f} M trees/s")
        histogram = ", ".join(f"{d}: {n:,}" for d, n in census.histogram.items())
        row("    nets by longest chain (hinges)", "", histogram)
        if len(census.representatives) != nets:
            failures.append(f"{spec}: {len(census.representatives)} representatives, Burnside {nets}")
    print()
    return failures


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the 5,184,000-tree listings")
    args = parser.parse_args(argv)
    specs = ["tetrahedron", "cube", "octahedron", "prism:3", "prism:5", "prism:6", "dodecahedron", "icosahedron"]
    failures = list(itertools.chain.from_iterable(bench(s, not args.quick) for s in specs))
    print("summary: " + ("all counts agree with the published values and networkx" if not failures
                         else "DISAGREEMENT: " + "; ".join(failures)))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
