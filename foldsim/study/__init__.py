"""Net studies: every net of a shape (or a sample) through the whole check, ranked.

Modules, bottom first:

- `sampling`: the nets of a study: all up to symmetry (`foldsim.netcount`), or
  spanning trees drawn uniformly by Wilson's algorithm, symmetric duplicates removed;
- `sweep`: the collision sweep with an early exit at the first collision;
- `evaluate`: one net through the pipeline of `foldsim new` and `foldsim check`,
  as one row (`COLUMNS`);
- `table`: the study on disk (plan, chunk files, the joined Parquet table);
- `run`: planning and running, serially or on Dask (`dask.distributed`);
- `rank`: criteria, ordering, the Pareto front, the summary;
- `plot`: a scatter of two criteria with the front marked (matplotlib).

Nothing here imports dask, pyarrow or matplotlib at module level.
"""
