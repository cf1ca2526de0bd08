"""A study on disk: its plan, the chunk files written as work finishes, the joined table.

A study is a directory::

    STUDY/study.json              what was asked (shape, options) and the nets, in order
    STUDY/chunks/chunk-000000.parquet   the rows of nets 0..C-1, written when that chunk is done
    STUDY/nets.parquet            every row, by net number, once every chunk is in
    STUDY/nets.csv                the same rows as CSV, when asked for

Every file is written to a temporary name and renamed into place, so a chunk file
is either whole or absent: resuming skips exactly the chunks that are present. The
tables go through pyarrow (Parquet); pyarrow loads only when a table is read or
written.
"""

import json
import os
import tempfile
from pathlib import Path

from ..errors import ModelError
from .evaluate import COLUMNS, StudySpec

FORMAT = "foldsim-study"
VERSION = 1
PLAN = "study.json"
TABLE = "nets.parquet"
CSV = "nets.csv"
CHUNKS = "chunks"


def is_study(path):
    """Whether a path is a study directory (it holds a ``study.json``)."""
    return (Path(path) / PLAN).is_file()


def schema():
    """The pyarrow schema of a study table (`foldsim.study.evaluate.COLUMNS`)."""
    import pyarrow as pa

    types = {"int": pa.int64(), "str": pa.string(), "float": pa.float64(), "bool": pa.bool_()}
    return pa.schema([(name, types[kind]) for name, kind, _ in COLUMNS])


def _atomic(path, write):
    """Call ``write(temporary_path)`` and rename the result onto ``path``."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    os.close(fd)
    try:
        write(tmp)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_plan(study, plan):
    """Create the study directory and write its plan (a JSON-ready dict)."""
    study = Path(study)
    try:
        (study / CHUNKS).mkdir(parents=True, exist_ok=True)
        _atomic(study / PLAN, lambda tmp: Path(tmp).write_text(json.dumps(plan, indent=1) + "\n"))
    except OSError as exc:
        raise ModelError(f"{study}: cannot write the study: {exc.strerror or exc}") from None


def read_plan(study):
    """The plan of a study directory, checked."""
    path = Path(study) / PLAN
    try:
        plan = json.loads(path.read_text())
    except FileNotFoundError:
        raise ModelError(f"{study}: not a study (no {PLAN})") from None
    except (OSError, ValueError) as exc:
        raise ModelError(f"{path}: cannot read the study plan: {exc}") from None
    if not isinstance(plan, dict) or plan.get("format") != FORMAT:
        raise ModelError(f"{path}: format: not a foldsim study plan")
    if not isinstance(plan.get("version"), int) or plan["version"] > VERSION:
        raise ModelError(f"{path}: version: {plan.get('version')!r} is newer than this foldsim reads ({VERSION})")
    for key in ("spec", "trees", "chunk"):
        if key not in plan:
            raise ModelError(f"{path}: {key}: missing")
    return plan


def plan_spec(plan):
    """The `StudySpec` of a plan."""
    return StudySpec(**plan["spec"])


def chunk_path(study, k):
    return Path(study) / CHUNKS / f"chunk-{k:06d}.parquet"


def done_chunks(study):
    """Numbers of the chunks whose files are present."""
    out = set()
    for path in (Path(study) / CHUNKS).glob("chunk-*.parquet"):
        stem = path.stem.partition("-")[2]
        if stem.isdigit():
            out.add(int(stem))
    return out


def rows_table(rows):
    """A pyarrow Table of row dicts, in the study schema."""
    import pyarrow as pa

    s = schema()
    return pa.Table.from_pydict({name: [row[name] for row in rows] for name in s.names}, schema=s)


def write_chunk(study, k, rows):
    """Write one chunk's rows atomically."""
    import pyarrow.parquet as pq

    table = rows_table(rows)
    _atomic(chunk_path(study, k), lambda tmp: pq.write_table(table, tmp))


def read_chunks(study):
    """Every row present in the chunk files, ordered by net number (a pyarrow Table)."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    tables = [pq.read_table(chunk_path(study, k), schema=schema()) for k in sorted(done_chunks(study))]
    table = pa.concat_tables(tables) if tables else schema().empty_table()
    return table.sort_by("net")


def write_table(study, csv=False):
    """Join the chunks into ``nets.parquet`` (and ``nets.csv``); returns the Table."""
    import pyarrow.csv as pcsv
    import pyarrow.parquet as pq

    table = read_chunks(study)
    _atomic(Path(study) / TABLE, lambda tmp: pq.write_table(table, tmp))
    if csv:
        _atomic(Path(study) / CSV, lambda tmp: pcsv.write_csv(table, tmp))
    return table


def read_table(study):
    """The study's rows as a list of dicts: the joined table, else whatever chunks are in."""
    import pyarrow.parquet as pq

    path = Path(study) / TABLE
    try:
        table = pq.read_table(path, schema=schema()) if path.is_file() else read_chunks(study)
    except OSError as exc:
        raise ModelError(f"{path}: cannot read the study table: {exc}") from None
    return table.to_pylist()
