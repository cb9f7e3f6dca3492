"""The chunk scorer over Dask partitions (local synchronous scheduler) equals the plain path."""

from __future__ import annotations

import pytest

from tubulo.screen.run import screen_table
from tubulo.screen.sample import sample_cases, to_long, to_wide

dd = pytest.importorskip("dask.dataframe")
dask = pytest.importorskip("dask")


@pytest.mark.parametrize("layout", ["wide", "long"])
def test_dask_partitions_give_the_plain_result(sk, layout):
    from tubulo.screen.parallel import screen_dask

    cases = sample_cases(sk, 150, seed=51)
    table = to_long(cases) if layout == "long" else to_wide(cases)
    plain = screen_table(table, layout, sk).to_pandas().set_index("case").sort_index()
    ddf = dd.from_pandas(table.to_pandas(), npartitions=4)
    with dask.config.set(scheduler="synchronous"):
        got = screen_dask(ddf, layout=layout).compute()
    got = got.set_index("case").sort_index()
    assert list(got.index) == list(plain.index) and len(got) == len(cases)
    assert got.equals(plain)
    assert got["route"].eq("matrix").sum() > 100
