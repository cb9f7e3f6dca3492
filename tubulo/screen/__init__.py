"""Batch screening of laboratory extracts (`tubulo screen`): the chunk scorer, file streaming, Dask.

numpy and pyarrow load only with the submodules (`run`, `stream`, `parallel`), which the `screen`
command imports when it runs; importing `tubulo.screen` or `tubulo.screen.cli` stays light.
"""

__all__: list[str] = []
