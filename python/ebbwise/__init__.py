"""ebbwise from Python: reduce soundings to chart datum on pyarrow record batches.

    import ebbwise
    reducer = ebbwise.Reducer("project.toml", group=0)
    reduced = reducer.reduce(batch)          # pyarrow.RecordBatch in, pyarrow.RecordBatch out
    reducer.tide_at(x, y, t_s)               # the tide at one point and time

The reducer is the one the `ebbwise` command runs: the same checks, statuses, uncertainty and
verdicts. Results are for qualified hydrographic review; the responsible authority's
specifications, local regulations and licensed practice take precedence.
"""

from ._ebbwise import CAUTION, Reducer, version

__all__ = ["CAUTION", "Reducer", "reduce_table", "version"]


def reduce_table(reducer, table):
    """Reduces every batch of a pyarrow Table (or anything with `to_batches()`); returns a
    pyarrow Table of the reduced batches, in order."""
    import pyarrow as pa

    batches = [reducer.reduce(b) for b in table.to_batches()]
    if not batches:
        # No rows (an empty row group): the reduced table's columns, no rows.
        empty = pa.RecordBatch.from_pylist([], schema=table.schema)
        batches = [reducer.reduce(empty)]
    return pa.Table.from_batches(batches)
