"""flowsift on Dask: ``velocities`` over a partitioned catalogue, one task per partition.

The partitions' lengths are computed first; each partition is then given the index of its
first row in the whole catalogue (``row_offset``), and Monte Carlo draws are seeded per row
of the whole catalogue, so the result, Monte Carlo columns included, is the one
``flowsift velocities`` gives on the concatenated catalogue with the same seed, however the
data are partitioned and however many workers run.

Sample stages that need the whole sample (outliers, bulk flow, groups, export) cannot run
on a piece: run them on the collected result (``flowsift outliers``, ``bulkflow``, ...).
"""

import itertools

import pyarrow as pa

import flowsift

__all__ = ["velocities"]


def _refuse_whole_sample(options):
    whole = set(flowsift.option_names("velocities-whole-sample"))
    given = sorted(k for k, v in options.items() if k in whole and v not in (None, False))
    if given:
        raise ValueError(
            "flowsift.dask.velocities(): "
            + ", ".join(given)
            + " need the whole sample, which no partition holds: run velocities per "
            "partition without them, collect the result, then run the stage on it "
            "(flowsift outliers, bulkflow, groups or export on a saved file)"
        )


def _partition_velocities(frame, row_offset, options, threads):
    """One partition through ``flowsift.velocities``, back as pandas."""
    table = pa.Table.from_pandas(frame, preserve_index=False)
    out = flowsift.velocities(table, row_offset=int(row_offset), threads=threads, **options)
    result = out.to_pandas(types_mapper=None)
    result.index = frame.index
    return result


def velocities(ddf, *, threads=1, **options):
    """``flowsift.velocities`` on each partition of the Dask DataFrame ``ddf``.

    ``options`` are those of :func:`flowsift.velocities`; ``threads`` (default 1) is each
    task's thread count, so workers with one thread each do not oversubscribe. Returns a
    Dask DataFrame with the output columns of every row, in order (one task per partition).
    The provenance of the runs is not carried: a Dask frame has no schema metadata.
    """
    import dask
    import dask.dataframe as dd

    if "row_offset" in options:
        raise TypeError("flowsift.dask.velocities() computes each partition's row_offset itself")
    _refuse_whole_sample(options)
    # The partitions as tasks, once: their lengths, then each one's first row in the whole.
    parts = ddf.to_delayed()
    lengths = dask.compute(*[dask.delayed(len)(part) for part in parts])
    offsets = [0] + list(itertools.accumulate(int(n) for n in lengths))[:-1]
    # The output's columns and types: the call on the first rows (the empty frame if none).
    first = next((k for k, n in enumerate(lengths) if n > 0), None)
    sample = ddf._meta if first is None else dask.compute(parts[first])[0].head(8)
    meta = _partition_velocities(sample, 0, options, threads).iloc[:0]
    call = dask.delayed(_partition_velocities, pure=True)
    pieces = [call(part, offset, options, threads) for part, offset in zip(parts, offsets)]
    return dd.from_delayed(pieces, meta=meta, verify_meta=False)
