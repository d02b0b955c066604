"""Reduce a folder of Parquet soundings files on a Dask cluster, partition by partition.

Each task reduces one row group of one file with the ebbwise Python bindings and writes it to
`<stem>.rgNNNNN.reduced.parquet` in the output folder (under a temporary name, renamed when
complete). Every worker loads the project once, on its first task, and keeps it.

    python dask_reduce.py PROJECT.toml SOUNDINGS_FOLDER OUT_FOLDER [--group N]
                          [--scheduler tcp://host:8786 | --local-workers 2]

Without --scheduler it starts a LocalCluster of --local-workers processes on this machine. On
a real cluster every worker must see the project file and its inputs (the gauge records, the
zoning) at the same paths, and the soundings folder; see docs/scaling.md.

Results are for qualified hydrographic review; the responsible authority's specifications,
local regulations and licensed practice take precedence.
"""

import argparse
import glob
import os
import uuid

import pyarrow.parquet as pq

import ebbwise


def _reducer(project, group):
    """The worker's Reducer for (project, group), loaded on its first task."""
    from distributed import get_worker

    try:
        holder = get_worker()
    except ValueError:  # not on a worker (run inline)
        holder = _reducer
    cache = getattr(holder, "_ebbwise_reducers", None)
    if cache is None:
        cache = {}
        setattr(holder, "_ebbwise_reducers", cache)
    key = (project, group)
    if key not in cache:
        cache[key] = ebbwise.Reducer(project, group)
    return cache[key]


def partition_name(path, row_group):
    stem = os.path.splitext(os.path.basename(path))[0]
    return f"{stem}.rg{row_group:05d}.reduced.parquet"


def reduce_partition(project, group, path, row_group, out_dir):
    """Reduces row group `row_group` of `path`; returns (path, row_group, rows, statuses)."""
    reducer = _reducer(project, group)
    table = pq.ParquetFile(path).read_row_group(row_group)
    reduced = ebbwise.reduce_table(reducer, table)
    final = os.path.join(out_dir, partition_name(path, row_group))
    # A name of its own per attempt (a retried or speculative task may run twice at once); an
    # attempt that fails removes its temporary file.
    temp = os.path.join(out_dir, f".{os.path.basename(final)}.{uuid.uuid4().hex}.partial")
    try:
        pq.write_table(reduced, temp)
        os.replace(temp, final)
    finally:
        if os.path.exists(temp):
            os.remove(temp)
    statuses = {}
    for s in reduced.column("status").to_pylist():
        statuses[s] = statuses.get(s, 0) + 1
    return path, row_group, reduced.num_rows, statuses


def partitions(folder):
    """Every (file, row group) of the folder's Parquet files, in name order."""
    out = []
    for path in sorted(glob.glob(os.path.join(folder, "*.parquet"))):
        for rg in range(pq.ParquetFile(path).metadata.num_row_groups):
            out.append((path, rg))
    return out


def reduce_folder(client, project, group, folder, out_dir):
    """Submits one task per partition to `client`; returns their results in partition order."""
    os.makedirs(out_dir, exist_ok=True)
    project = os.path.abspath(project)
    futures = [
        client.submit(
            reduce_partition, project, group, os.path.abspath(p), rg, out_dir, pure=False
        )
        for p, rg in partitions(folder)
    ]
    return client.gather(futures)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("project")
    ap.add_argument("folder")
    ap.add_argument("out")
    ap.add_argument("--group", type=int, default=0)
    ap.add_argument("--scheduler")
    ap.add_argument("--local-workers", type=int, default=2)
    a = ap.parse_args()
    from distributed import Client, LocalCluster

    if a.scheduler:
        client = Client(a.scheduler)
    else:
        cluster = LocalCluster(n_workers=a.local_workers, threads_per_worker=1, processes=True)
        client = Client(cluster)
    results = reduce_folder(client, a.project, a.group, a.folder, os.path.abspath(a.out))
    totals = {}
    for _, _, _, st in results:
        for k, v in st.items():
            totals[k] = totals.get(k, 0) + v
    print(f"{len(results)} partitions, {sum(r[2] for r in results)} soundings: {totals}")
    print(ebbwise.CAUTION)


if __name__ == "__main__":
    main()
