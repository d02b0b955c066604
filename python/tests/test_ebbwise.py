"""The Python bindings and the Dask example reduce as the `ebbwise` command does.

The demo's launch A soundings are written as Parquet with pyarrow; the command reduces them
(`ebbwise reduce --format parquet`), and so do the bindings (one process, then a Dask
LocalCluster of two worker processes); every column of every sounding must be equal. The
Parquet files are read with pyarrow, an implementation independent of ebbwise's.

Run: python -m unittest discover -s python/tests (after `pip install ./python` and a release
build of the `ebbwise` command; EBBWISE_BIN names another binary).
"""

import json
import os
import subprocess
import sys
import tempfile
import unittest

import pyarrow as pa
import pyarrow.csv as pcsv
import pyarrow.parquet as pq

import ebbwise

REPO = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
DEMO = os.path.join(REPO, "zoning-demo")
BIN = os.environ.get("EBBWISE_BIN", os.path.join(REPO, "target", "release", "ebbwise"))
sys.path.insert(0, os.path.join(REPO, "python", "examples"))


def launch_a_table():
    """launch-a.csv as typed columns: the time a UTC timestamp, the numbers doubles."""
    opts = pcsv.ConvertOptions(
        column_types={
            "time": pa.timestamp("us", tz="UTC"),
            "easting": pa.float64(),
            "northing": pa.float64(),
            "depth_m": pa.float64(),
            "line": pa.string(),
        }
    )
    return pcsv.read_csv(os.path.join(DEMO, "soundings", "launch-a.csv"), convert_options=opts)


def project_for(folder, files):
    """The demo project with its first group reading `files` (absolute paths everywhere)."""
    with open(os.path.join(DEMO, "project.toml"), encoding="utf-8") as f:
        text = f.read()
    text = text.replace('zoning = "zoning.geojson"', f'zoning = "{DEMO}/zoning.geojson"')
    text = text.replace('record = "gauges/', f'record = "{DEMO}/gauges/')
    text = text.replace('constants = "tide-model/', f'constants = "{DEMO}/tide-model/')
    listed = ", ".join(f'"{p}"' for p in files)
    text = text.replace('files = ["soundings/launch-a.csv"]', f"files = [{listed}]")
    text = text.replace('"soundings/', f'"{DEMO}/soundings/')
    path = os.path.join(folder, "project.toml")
    with open(path, "w", encoding="utf-8") as f:
        f.write(text)
    return path


def command_reduce(project, out):
    """The command's reduction to Parquet; exit 1 is the demo's planted faults."""
    r = subprocess.run(
        [BIN, "reduce", project, "--out", out, "--no-progress", "--format", "parquet"],
        capture_output=True,
        text=True,
    )
    assert r.returncode == 1, r.stderr


def assert_same_rows(test, got, want, label):
    test.assertEqual(got.num_rows, want.num_rows, label)
    test.assertEqual(got.schema.names, want.schema.names, label)
    for name in want.schema.names:
        g = got.column(name).to_pylist()
        w = want.column(name).to_pylist()
        for i, (a, b) in enumerate(zip(g, w)):
            test.assertEqual(a, b, f"{label}: row {i} column {name}")


class BindingsTest(unittest.TestCase):
    def test_batches_reduced_from_python_equal_the_commands_parquet_output(self):
        with tempfile.TemporaryDirectory() as d:
            table = launch_a_table()
            src = os.path.join(d, "launch-a.parquet")
            pq.write_table(table, src, row_group_size=20_000)
            project = project_for(d, [src])
            command_reduce(project, os.path.join(d, "out"))
            want = pq.read_table(os.path.join(d, "out", "launch-a.reduced.parquet"))
            reducer = ebbwise.Reducer(project, 0)
            self.assertEqual(reducer.order, "special")
            got = ebbwise.reduce_table(reducer, pq.read_table(src))
            assert_same_rows(self, got, want, "bindings")
            # An empty row group reduces to an empty table of the reduced columns.
            empty = ebbwise.reduce_table(reducer, pq.read_table(src).slice(0, 0))
            self.assertEqual(empty.num_rows, 0)
            self.assertEqual(empty.schema.names, want.schema.names)
            # The input's columns come back as the same buffers: not copied.
            batch = table.to_batches(max_chunksize=1000)[0]
            out = reducer.reduce(batch)
            self.assertEqual(
                out.column(1).buffers()[1].address, batch.column(1).buffers()[1].address
            )
            self.assertEqual(out.num_rows, batch.num_rows)
            # Units ride along in the field metadata.
            self.assertEqual(out.schema.field("u95_tvu_m").metadata[b"unit"], b"m")
            # The provenance the command wrote names the soundings file with its SHA-256.
            prov = json.loads(
                pq.read_metadata(os.path.join(d, "out", "launch-a.reduced.parquet")).metadata[
                    b"ebbwise.provenance"
                ]
            )
            self.assertEqual(prov["inputs"][-1]["path"], src)

    def test_the_tide_at_a_point_is_the_tide_of_a_sounding_there(self):
        with tempfile.TemporaryDirectory() as d:
            table = launch_a_table().slice(0, 1)
            project = project_for(d, [os.path.join(DEMO, "soundings", "launch-a.csv")])
            reducer = ebbwise.Reducer(project, 0)
            row = reducer.reduce(table.to_batches()[0]).to_pylist()[0]
            t_s = row["time"].timestamp()
            p = reducer.tide_at(row["easting"], row["northing"], t_s)
            self.assertEqual(p["zone"], row["zone"])
            self.assertEqual(p["tide_m"], row["tide_m"])
            self.assertEqual(p["u_tide_m"], row["u_tide_m"])
            outside = reducer.tide_at(100_000.0, 100_000.0, t_s)
            self.assertEqual(outside["status"], "outside_zoning")
            self.assertIsNone(outside["tide_m"])

    def test_a_missing_column_is_an_error_naming_it(self):
        with tempfile.TemporaryDirectory() as d:
            project = project_for(d, [os.path.join(DEMO, "soundings", "launch-a.csv")])
            reducer = ebbwise.Reducer(project, 0)
            bad = pa.record_batch([pa.array(["2026-06-14T10:00:00Z"])], names=["time"])
            with self.assertRaisesRegex(ValueError, "easting"):
                reducer.reduce(bad)


class DaskTest(unittest.TestCase):
    def test_a_local_cluster_of_two_workers_reduces_every_sounding_as_the_command_does(self):
        import dask_reduce
        from distributed import Client, LocalCluster

        with tempfile.TemporaryDirectory() as d:
            table = launch_a_table()
            folder = os.path.join(d, "soundings")
            os.makedirs(folder)
            half = table.num_rows // 2
            files = []
            for k, part in enumerate([table.slice(0, half), table.slice(half)]):
                p = os.path.join(folder, f"part-{k}.parquet")
                pq.write_table(part, p, row_group_size=8_000)
                files.append(p)
            project = project_for(d, files)
            command_reduce(project, os.path.join(d, "cli"))
            out = os.path.join(d, "dask")
            with LocalCluster(
                n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
            ) as cluster, Client(cluster) as client:
                results = dask_reduce.reduce_folder(client, project, 0, folder, out)
                workers = client.run(lambda dask_worker: hasattr(dask_worker, "_ebbwise_reducers"))
            self.assertEqual(len(workers), 2)
            self.assertGreater(len(results), 4, "several partitions")
            for p in files:
                stem = os.path.splitext(os.path.basename(p))[0]
                want = pq.read_table(os.path.join(d, "cli", f"{stem}.reduced.parquet"))
                n = pq.ParquetFile(p).metadata.num_row_groups
                parts = [
                    pq.read_table(os.path.join(out, dask_reduce.partition_name(p, rg)))
                    for rg in range(n)
                ]
                got = pa.concat_tables(parts)
                assert_same_rows(self, got, want, stem)
            self.assertEqual(sum(r[2] for r in results), table.num_rows)


if __name__ == "__main__":
    unittest.main()
