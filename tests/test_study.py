"""Net studies (`foldsim study`, `foldsim.study`): counts, sampling, Dask, resume, ranking."""

import json
import os
import signal
import time
from collections import Counter

import networkx as nx
import numpy as np
import pytest
from scipy.stats import chisquare

from foldsim.cli import main
from foldsim.design import build, shape_args
from foldsim.io.mechanism_json import load
from foldsim.nets import face_graph, face_pairs
from foldsim.report import check
from foldsim.solids import builtin
from foldsim.study import table
from foldsim.study.evaluate import COLUMNS, StudySpec, evaluate, net_mechanism
from foldsim.study.rank import pareto_front, parse_criteria, ranked
from foldsim.study.run import make_plan, run_study
from foldsim.study.sampling import sample_nets, tree_mask, wilson_tree
from foldsim.study.sweep import first_collision
from foldsim.symmetry import symmetry_group


def run(capsys, *argv):
    code = main(list(argv))
    out = capsys.readouterr()
    return code, out.out, out.err


def new_study(path, shape, **options):
    spec = StudySpec(shape=shape)
    plan = make_plan(spec, options.pop("nets", "all"), options.pop("seed", 0), options.pop("chunk", None))
    table.write_plan(path, plan)
    return plan


@pytest.fixture(scope="module")
def serial(tmp_path_factory):
    """Serial studies of the small solids, run once for the module: {shape: (study, rows)}."""
    out = {}
    for shape in ("tetrahedron", "cube", "octahedron"):
        path = tmp_path_factory.mktemp("serial") / shape.replace(":", "")
        new_study(path, shape, chunk=1 if shape == "cube" else None)
        run_study(path, scheduler="none")
        out[shape] = (path, table.read_table(path))
    return out


@pytest.mark.parametrize("shape, count", [
    # Buekenhout & Parker, Discrete Math. 186 (1998): nets up to symmetry (from memory;
    # shared/REFERENCES.md).
    ("tetrahedron", 2), ("cube", 11), ("octahedron", 11)])
def test_a_full_study_has_one_row_per_published_net(serial, shape, count):
    _, rows = serial[shape]
    assert len(rows) == count
    assert [r["net"] for r in rows] == list(range(count))
    assert len({r["tree"] for r in rows}) == count
    assert all(r["error"] is None for r in rows)


def test_every_row_has_every_column_and_the_diameters_match_networkx(serial):
    path, rows = serial["cube"]
    graph = face_graph(builtin("cube").faces)
    for row in rows:
        assert list(row) == [name for name, _, _ in COLUMNS]
        cuts = {tuple(map(int, p.split("-"))) for p in row["cuts"].split(",")}
        tree = nx.Graph([e for e in map(tuple, face_pairs(graph).tolist()) if e not in cuts])
        # networkx as the outside reference: the kept pairs form a spanning tree of
        # the six faces, and its diameter is the row's.
        assert nx.is_tree(tree) and tree.number_of_nodes() == 6
        assert row["diameter"] == nx.diameter(tree)
    assert (path / "nets.parquet").is_file()


def test_the_cubes_best_diameter_nets_have_three_hinges(serial):
    # The cube's shortest possible longest hinge chain is 3 (shared/REFERENCES.md,
    # "Shortest hinge chains": minimum-diameter spanning tree, Hassin & Tamir 1995).
    _, rows = serial["cube"]
    best = ranked(rows, ["diameter"])
    assert best[0]["diameter"] == 3
    assert min(r["diameter"] for r in rows) == 3
    assert all(r["diameter"] >= 3 for r in rows)


def test_wilsons_sampler_is_uniform_on_the_cubes_384_spanning_trees():
    graph = face_graph(builtin("cube").faces)
    pairs = face_pairs(graph)
    index = {tuple(p): e for e, p in enumerate(pairs.tolist())}
    neighbours = [sorted(graph.neighbors(f)) for f in range(6)]
    rng = np.random.default_rng(20260)
    draws = 384 * 40
    counts = Counter(tree_mask(wilson_tree(neighbours, rng), index) for _ in range(draws))
    # The cube's face graph (the octahedral graph) has 384 spanning trees
    # (shared/REFERENCES.md; networkx's matrix-tree count as the reference).
    assert round(nx.number_of_spanning_trees(graph)) == 384
    assert len(counts) == 384
    # Chi-square goodness of fit against the uniform distribution (scipy.stats), at a
    # significance of 0.001 with a fixed seed: uniformity is kept unless p < 0.001.
    assert chisquare(list(counts.values())).pvalue > 1e-3


def test_the_chi_square_check_rejects_a_sampler_that_is_not_uniform():
    # The same test on a known non-uniform sampler (minimum spanning trees of random
    # edge weights favour some trees; common practice) must fail, so it can fail.
    graph = face_graph(builtin("cube").faces)
    index = {tuple(p): e for e, p in enumerate(face_pairs(graph).tolist())}
    rng = np.random.default_rng(20260)
    counts = Counter()
    for _ in range(384 * 40):
        for (a, b), w in zip(graph.edges, rng.random(graph.number_of_edges())):
            graph.edges[a, b]["w"] = w
        counts[tree_mask(nx.minimum_spanning_tree(graph, weight="w").edges, index)] += 1
    observed = list(counts.values()) + [0] * (384 - len(counts))
    assert chisquare(observed).pvalue < 1e-3


def test_a_sample_removes_symmetric_duplicates(serial):
    cube = builtin("cube")
    graph = face_graph(cube.faces)
    trees = sample_nets(graph, face_pairs(graph), symmetry_group(cube).edges, 600, seed=3)
    # 600 uniform trees out of 384 reach every one of the 11 nets (Buekenhout &
    # Parker 1998) with near certainty, and one tree per net is kept.
    assert len(trees) == 11
    _, rows = serial["cube"]
    assert sorted(trees) == sorted(int(r["tree"], 16) for r in rows)


def test_a_sample_study_runs_from_the_command_line(capsys, tmp_path):
    code, out, _ = run(capsys, "study", "octahedron", "-o", str(tmp_path / "s"), "--nets", "sample:60",
                       "--seed", "1", "--scheduler", "none", "--json")
    assert code == 0
    report = json.loads(out)
    # At most the 11 nets of the octahedron (Buekenhout & Parker 1998).
    assert 1 <= report["nets"] <= 11 and report["failed"] == 0
    plan = table.read_plan(tmp_path / "s")
    assert plan["nets"] == "sample:60" and plan["spanning_trees"] == 384


@pytest.mark.parametrize("shape", ["cube", "octahedron"])
def test_rows_agree_with_foldsim_new_and_check(serial, shape):
    # The study's pipeline against the one `foldsim new` + `foldsim check` runs.
    _, rows = serial[shape]
    for row in rows[:6]:
        mech, report = build(shape_args(shape, cut=row["cuts"], root=row["root"]))
        assert row["gear_count"] == len(report["couplings"])
        assert row["gear_chain"] == report["longest_gear_chain"]
        assert row["part_types"] == report["part_type_count"]
        assert row["dof"] == report["dof"]
        assert row["diameter"] == report["net"]["diameter_hinges"]
        np.testing.assert_allclose(row["closure_gap"], report["closure_gap"], rtol=0, atol=1e-12)
        checked = check(mech)
        assert row["collision_free"] == (not checked["collisions"])
        assert row["flat_overlap"] == checked["flat_overlap"]


@pytest.fixture(scope="module")
def prism_slice(tmp_path_factory):
    """A study of nets 40..55 of the pentagonal prism, some of which collide on the way."""
    path = tmp_path_factory.mktemp("prism") / "s"
    plan = new_study(path, "prism:5")
    # OEIS A103535: the pentagonal prism has 99 nets; the plan lists one tree per net.
    assert len(plan["trees"]) == 99
    plan["trees"] = plan["trees"][40:56]
    table.write_plan(path, plan)
    run_study(path, scheduler="none")
    return path, table.read_table(path)


def test_the_early_exit_finds_the_first_collision_of_the_full_sweep(prism_slice):
    from foldsim.analysis.collision import collision_intervals
    from foldsim.gearing import fold_schedule

    _, rows = prism_slice
    spec = StudySpec(shape="prism:5")
    colliding = [r for r in rows if not r["collision_free"]]
    assert colliding, "some of these nets' panels collide on the way"
    for row in colliding[:3] + [r for r in rows if r["collision_free"]][:2]:
        mech, _, _ = net_mechanism(spec, int(row["tree"], 16))
        schedule = fold_schedule(mech)
        full = collision_intervals(mech, schedule)
        early = first_collision(mech, schedule)
        if not full:
            assert early is None and row["first_collision_t"] is None
            continue
        first = min(full, key=lambda c: (c["first_t"], c["faces"]))
        assert early == {"faces": first["faces"], "first_t": first["first_t"]}
        assert row["first_collision_t"] == first["first_t"]
        assert row["first_collision_faces"] == "-".join(map(str, first["faces"]))


def test_a_net_that_fails_gets_an_error_and_the_study_goes_on(tmp_path):
    path = tmp_path / "s"
    plan = new_study(path, "tetrahedron")
    plan["trees"].append("1")          # one hinge: not a spanning tree of four faces
    table.write_plan(path, plan)
    run_study(path, scheduler="none")
    rows = table.read_table(path)
    assert len(rows) == 3
    assert [r["error"] is None for r in rows] == [True, True, False]
    assert rows[2]["diameter"] is None and rows[2]["ok"] is None
    assert evaluate(StudySpec("tetrahedron"), 0, 0)["error"]


def test_an_interrupted_study_resumes_without_losing_or_repeating_a_net(capsys, tmp_path, serial):
    path = tmp_path / "s"
    new_study(path, "cube", chunk=1)

    def stop_after_four(done, todo):
        if done == 4:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        run_study(path, scheduler="none", progress=stop_after_four)
    assert table.done_chunks(path) == {0, 1, 2, 3}
    stats = run_study(path, scheduler="none")
    assert (stats["skipped"], stats["evaluated_now"]) == (4, 7)
    rows = table.read_table(path)
    assert [r["net"] for r in rows] == list(range(11))
    assert rows == serial["cube"][1]
    # the same through the command line: nothing left to do, same table
    code, out, _ = run(capsys, "study", "cube", "-o", str(path), "--resume", "--scheduler", "none", "--json")
    assert code == 0 and json.loads(out)["nets"] == 11


@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  silence_logs=40) as local:
        yield local


def test_dask_rows_equal_the_serial_rows(tmp_path, serial, cluster):
    for shape in ("cube", "octahedron"):
        path = tmp_path / shape
        new_study(path, shape, chunk=2)
        stats = run_study(path, scheduler=cluster.scheduler_address)
        assert stats["evaluated_now"] == 11
        assert table.read_table(path) == serial[shape][1]


def test_a_worker_killed_mid_study_loses_and_repeats_no_net(tmp_path, serial, cluster):
    path = tmp_path / "s"
    new_study(path, "octahedron", chunk=1)
    killed = []

    def kill_a_busy_worker(client):
        deadline = time.monotonic() + 20
        while time.monotonic() < deadline:
            busy = [w for w, keys in client.processing().items() if keys]
            if busy:
                pid = client.run(os.getpid, workers=[busy[0]])[busy[0]]
                os.kill(pid, signal.SIGKILL)
                killed.append(pid)
                return
            time.sleep(0.01)

    run_study(path, scheduler=cluster.scheduler_address, on_client=kill_a_busy_worker)
    assert killed
    rows = table.read_table(path)
    # the octahedron's 11 nets (Buekenhout & Parker 1998), each exactly once.
    assert sorted(Counter(r["net"] for r in rows).items()) == [(k, 1) for k in range(11)]
    assert len(table.done_chunks(path)) == 11
    assert rows == serial["octahedron"][1]


def test_the_default_local_cluster_from_the_command_line(capsys, tmp_path, serial):
    code, out, err = run(capsys, "study", "tetrahedron", "-o", str(tmp_path / "s"), "--workers", "1", "--json")
    assert code == 0
    assert err == ""                    # no progress bar under --json
    report = json.loads(out)
    assert (report["nets"], report["evaluated"], report["failed"]) == (2, 2, 0)
    assert table.read_table(tmp_path / "s") == serial["tetrahedron"][1]


def test_the_progress_bar_shows_rate_and_eta(capsys, tmp_path):
    code, _, err = run(capsys, "study", "tetrahedron", "-o", str(tmp_path / "s"), "--scheduler", "none")
    assert code == 0
    assert "nets 2/2" in err and "nets/s" in err and "ETA" in err


def test_the_pareto_front_matches_a_brute_force_definition():
    rng = np.random.default_rng(7)
    rows = [{"net": i, "error": None, "diameter": int(d), "part_types": int(p), "collision_free": bool(c)}
            for i, (d, p, c) in enumerate(zip(rng.integers(3, 8, 60), rng.integers(2, 9, 60), rng.random(60) < .7))]
    names = ["collision_free", "diameter", "part_types"]
    cost = {r["net"]: (-r["collision_free"], r["diameter"], r["part_types"]) for r in rows}

    def dominated(a):
        # the definition of Pareto dominance, pair by pair
        return any(all(x <= y for x, y in zip(cost[b], cost[a])) and cost[b] != cost[a] for b in cost)

    assert sorted(r["net"] for r in pareto_front(rows, names)) == sorted(n for n in cost if not dominated(n))


def test_rank_pick_and_plot(capsys, tmp_path, serial):
    from PIL import Image

    path, rows = serial["cube"]
    code, out, _ = run(capsys, "study", str(path), "--rank", "collision_free, part_types, diameter", "--top", "3",
                       "--json", "--pick", "0", "-o", str(tmp_path / "best.mech.json"),
                       "--plot", str(tmp_path / "front.png"))
    assert code == 0
    report = json.loads(out)
    assert len(report["top"]) == 3
    assert report["best"]["diameter"]["value"] == 3        # Hassin & Tamir; shared/REFERENCES.md
    assert report["pareto_front"] == len(report["front"]) >= 1
    mech = load(tmp_path / "best.mech.json")
    checked = check(mech)
    assert checked["part_type_count"] == rows[0]["part_types"]
    assert checked["dof"] == 1 and checked["closure"]["meets"] and not checked["collisions"]
    image = np.asarray(Image.open(tmp_path / "front.png").convert("RGB")).astype(int)
    assert image.shape[:2] == (480, 640)
    # the scatter's blue points (alpha 0.6 over white) and the front's dark line are drawn
    blue = (np.abs(image - [146, 175, 211]).sum(axis=2) < 40).sum()
    dark = (np.abs(image - [0x22, 0x22, 0x22]).sum(axis=2) < 30).sum()
    assert blue > 50 and dark > 50
    code, out, _ = run(capsys, "study", str(path))
    assert code == 0 and "Pareto front" in out and out.count("\n") >= 12


@pytest.mark.parametrize("argv, field", [
    (["cube", "-o", "{tmp}/s", "--nets", "some"], "--nets"),
    (["cube", "-o", "{tmp}/s", "--nets", "sample:0"], "--nets"),
    (["cube", "-o", "{tmp}/s", "--workers", "0"], "--workers"),
    (["cube", "-o", "{tmp}/s", "--mc", "-1"], "--mc"),
    (["cube", "-o", "{tmp}/s", "--process", "clay"], "--process"),
    (["cube"], "-o"),
    (["nonsense-solid", "-o", "{tmp}/s"], "shape"),
    (["{study}", "--rank", "beauty"], "--rank"),
    (["{study}", "--rank", "p95_gap"], "--rank"),
    (["{study}", "--pick", "99", "-o", "{tmp}/x.mech.json"], "--pick"),
    (["{study}", "--plot", "{tmp}/x.png", "--axes", "diameter"], "--axes"),
    (["{study}", "-o", "{tmp}/x.mech.json"], "-o"),
    (["cube", "-o", "{study}"], "-o"),
    (["octahedron", "-o", "{study}", "--resume", "--scheduler", "none"], "--resume"),
])
def test_bad_input_is_one_line_and_exit_2(capsys, tmp_path, serial, argv, field):
    study = str(serial["cube"][0])
    argv = [a.format(tmp=tmp_path, study=study) for a in argv]
    code, out, err = run(capsys, "study", *argv)
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("foldsim: ") and "Traceback" not in err
    if field != "shape":
        assert field in err
    assert not (tmp_path / "s").exists() or field == "-o"


def test_criteria_names_are_columns():
    names = {name for name, _, _ in COLUMNS}
    from foldsim.study.rank import CRITERIA

    assert set(CRITERIA) <= names
    assert parse_criteria("ok,diameter") == ["ok", "diameter"]


def test_the_review_report_embeds_a_study(capsys, tmp_path, serial):
    html5lib = pytest.importorskip("html5lib")
    path, rows = serial["cube"]
    model = tmp_path / "best.mech.json"
    assert run(capsys, "study", str(path), "--pick", "0", "-o", str(model))[0] == 0
    out = tmp_path / "report.html"
    code, _, _ = run(capsys, "export", str(model), "-o", str(out), "--study", str(path))
    assert code == 0
    # parsed by an HTML5 parser (html5lib) as the outside reference
    doc = html5lib.parse(out.read_text(), namespaceHTMLElements=False)
    section = doc.find(".//section[@id='study']")
    assert section is not None
    assert section.find(".//{http://www.w3.org/2000/svg}svg[@id='study-front']") is not None \
        or section.find(".//svg[@id='study-front']") is not None
    listed = [int(tr.get("data-net")) for tr in section.iter("tr") if tr.get("class") == "study-net"]
    drawn = [int(f.get("data-net")) for f in section.iter("figure") if f.get("class") == "study-pattern"]
    best = [r["net"] for r in ranked(rows, ["collision_free", "worst_case_gap", "part_types", "diameter"])[:3]]
    assert listed == drawn == best
    code, _, err = run(capsys, "export", str(model), "-o", str(tmp_path / "x.svg"), "--study", str(path))
    assert code == 2 and "--study" in err


def test_monte_carlo_play_only_when_asked_and_as_foldsim_stackup_gives_it(capsys, tmp_path, serial):
    # without --mc the column is empty
    assert all(r["p95_gap"] is None for r in serial["cube"][1])
    path = tmp_path / "s"
    code, out, _ = run(capsys, "study", "tetrahedron", "-o", str(path), "--mc", "300", "--process", "filament",
                       "--size", "30", "--scheduler", "none", "--csv", "--json")
    assert code == 0
    report = json.loads(out)
    assert report["criteria"][1] == "p95_gap"          # the default ranking uses it with --mc
    rows = table.read_table(path)
    assert all(r["p95_gap"] is not None and r["p95_gap"] > 0 for r in rows)
    # the same figure as `foldsim stackup` on the picked net (same samples, seed 0, t = 1)
    model = tmp_path / "net0.mech.json"
    assert run(capsys, "study", str(path), "--pick", "0", "-o", str(model))[0] == 0
    code, out, _ = run(capsys, "stackup", str(model), "--samples", "300", "--process", "filament", "--t", "1",
                       "--json")
    assert code == 0
    np.testing.assert_allclose(rows[0]["p95_gap"], json.loads(out)["p95_gap"], rtol=1e-12)
    np.testing.assert_allclose(rows[0]["worst_case_gap"], json.loads(out)["worst_case_gap"], rtol=1e-12)
    # --csv: the same rows, read back by Python's csv module
    import csv

    with open(path / "nets.csv", newline="") as f:
        listed = list(csv.DictReader(f))
    assert [int(r["net"]) for r in listed] == [r["net"] for r in rows]
    assert [r["cuts"] for r in listed] == [r["cuts"] for r in rows]


def test_the_command_line_runs_on_an_existing_cluster(capsys, tmp_path, serial, cluster):
    address = cluster.scheduler_address
    code, out, _ = run(capsys, "study", "tetrahedron", "-o", str(tmp_path / "s"), "--scheduler", address, "--json")
    assert code == 0 and json.loads(out)["evaluated"] == 2
    assert table.read_table(tmp_path / "s") == serial["tetrahedron"][1]
    code, _, err = run(capsys, "study", "tetrahedron", "-o", str(tmp_path / "t"), "--scheduler", address,
                       "--workers", "2")
    assert code == 2 and "--workers" in err
    assert not (tmp_path / "t").exists()
