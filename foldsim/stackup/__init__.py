"""Tolerance stack-up: how hinge play and gear backlash open the closure gaps.

Every hinge and every gear mesh of a real mechanism is a little loose. Each
looseness is an *error source*: a small extra rigid motion at one hinge, carried
by everything beyond that hinge in the hinge tree. The sources of a hinge ``h``
are measured in its parent panel's frame, about the hinge midpoint ``m``, with
unit vectors ``u`` (the fold axis), ``n`` (the parent panel's outward normal) and
``w = n x u`` (across the hinge, in the parent's plane, pointing into the parent):

=============  ===========================================================
kind           motion of the child (and all beyond it)
=============  ===========================================================
play           turn about the hinge axis (adds to the fold angle), rad
tilt_across    turn about the line through ``m`` along ``w``, rad
tilt_normal    turn about the line through ``m`` along ``n``, rad
axial          slide along ``u``, length
shift_across   slide along ``w``, length
shift_normal   slide along ``n``, length
=============  ===========================================================

A gear mesh's backlash lets the driven gear turn by a little against its driver.
Meshes are walked along the tree that the drive reaches breadth-first through the
couplings (the same walk as `foldsim.gearing.fold_schedule`): a driven hinge
inherits its driver's transmitted angle error times the factor between them, plus
its mesh's own backlash, so errors pile up along a gear chain. A hinge's own play
adds to its angle but is not passed on through the gears (it is slack between the
panel and the gear that sets it). Couplings that close a cycle are not on that
tree and carry no backlash.

Two analyses, both at several drive values t (each Monte Carlo sample is one built
copy of the mechanism, the same at every t):

* **Monte Carlo** (`monte_carlo`): every source drawn independently, uniform
  within its ± bound or normal with the bound at 3 sigma, from a seeded numpy
  Generator; the perturbed poses are built exactly (finite rotations) for all
  samples and hinges at once, a chunk of samples at a time, and the gaps come from
  `foldsim.analysis.closure.cut_edge_gaps`.
* **Linearised** (`linear_stackup`): the analytic Jacobian of every cut edge's
  endpoint difference vectors (and of every panel vertex) with respect to every
  source. A source turning by a small angle about a line through ``a`` along
  ``w`` moves a point ``p`` beyond it by ``w x (p - a)``; a slide along ``v`` moves
  it by ``v``. The worst case adds ``|J| * bound`` per coordinate; RSS is
  ``sqrt(sum (J * sigma)**2)``.

Bounds here are always ± half-ranges ("the most a source can be off either way");
the mechanism file gives total free ranges (clearance, backlash) and `play_spec`
halves them.

Modules: `inputs` (error kinds, process presets, the file's ``tolerances``,
`PlaySpec`), `sources` (hinge frames, the gear tree, chain lengths), `sampling`
(error draws, perturbed poses, Monte Carlo), `linear` (Jacobians, worst case,
RSS), `results` (the full run, contributors, comparison, text).
"""

# Besides the public names, `_ranking`, `_chunk_size` and `_padded_faces` are
# internals that the tests and the benchmark reach through the package.
from .inputs import (
    DEFAULT_SAMPLES, DEFAULT_TIMES, DISTRIBUTIONS, KINDS, MM_PER_UNIT, N_KINDS, PROCESSES, PlaySpec, Process,
    ToleranceDoc, hinge_lengths, parse_tolerances, play_spec, process_preset, process_totals,
)
from .linear import LinearResult, gap_jacobian, linear_stackup, vertex_jacobian
from .results import Stackup, _ranking, compare, format_comparison, format_report, stackup  # noqa: F401
from .sampling import (  # noqa: F401
    Errors, MonteCarloResult, _chunk_size, _padded_faces, draw_errors, monte_carlo, perturbed_poses,
    tip_deviations,
)
from .sources import (
    GearTree, backlash_matrix, gear_tree, hinge_frames, longest_gear_chain, longest_hinge_chain, source_names,
    transmitted_errors,
)

__all__ = [
    "DEFAULT_SAMPLES", "DEFAULT_TIMES", "DISTRIBUTIONS", "KINDS", "MM_PER_UNIT", "N_KINDS", "PROCESSES",
    "Errors", "GearTree", "LinearResult", "MonteCarloResult", "PlaySpec", "Process", "Stackup", "ToleranceDoc",
    "backlash_matrix", "compare", "draw_errors", "format_comparison", "format_report", "gap_jacobian",
    "gear_tree", "hinge_frames", "hinge_lengths", "linear_stackup", "longest_gear_chain",
    "longest_hinge_chain", "monte_carlo", "parse_tolerances", "perturbed_poses", "play_spec",
    "process_preset", "process_totals", "source_names", "stackup", "tip_deviations", "transmitted_errors",
    "vertex_jacobian",
]
