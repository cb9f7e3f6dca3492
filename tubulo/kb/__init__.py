"""The knowledge graph: schema and loader (compile time), graph and consistency, compiled tables.

Import the submodule you need; this package imports nothing itself so that
`tubulo.kb.tables.load_tables()` stays free of pydantic and networkx when the cache is warm.
"""

__all__: list[str] = []
