"""Beyond one machine: the chunk scorer over a Dask DataFrame (optional extra: pip install 'tubulo[dask]').

`screen_frame` (run.py) is a pure function of one pandas partition, so `map_partitions` runs it
wherever Dask puts the partitions (threads, processes, a cluster); each worker compiles the
knowledge once.  A wide extract partitions freely (one row per case).  A long extract must keep the
rows of a case in one partition: `screen_dask` shuffles it on the case column first.

    import dask.dataframe as dd
    from tubulo.screen.parallel import screen_dask
    result = screen_dask(dd.read_parquet("extract/*.parquet"), layout="wide")
    result.to_parquet("screened/")        # or .compute() for a pandas frame
"""

from __future__ import annotations

from typing import Any

from .run import DEFAULT_TOP, output_schema, screen_frame

__all__ = ["screen_dask", "output_meta"]


def output_meta(k: int = DEFAULT_TOP) -> Any:
    """An empty pandas frame with the output columns and dtypes (the `meta` of map_partitions)."""
    return output_schema(k).empty_table().to_pandas()


def screen_dask(ddf: Any, layout: str = "wide", k: int = DEFAULT_TOP) -> Any:
    """A lazy Dask DataFrame of screening results, one row per case (partition order; a long
    extract comes back in the order of its shuffle)."""
    if layout not in ("long", "wide"):
        raise ValueError(f"layout {layout!r}: expected long or wide")
    if layout == "long":
        ddf = ddf.shuffle(on="case")
    return ddf.map_partitions(screen_frame, layout=layout, k=k, meta=output_meta(k))
