"""A knowledge file that is absent is a KnowledgeError naming the file, never a bare traceback."""

import pytest

from tubulo.errors import KnowledgeError
from tubulo.paths import require_knowledge_yaml


def test_missing_file_is_named():
    with pytest.raises(KnowledgeError, match=r"^no_such_table\.yaml: file missing from the knowledge folder$"):
        require_knowledge_yaml("no_such_table.yaml")


def test_present_file_is_returned_parsed():
    data = require_knowledge_yaml("reference_intervals.yaml")
    assert isinstance(data, dict) and data  # the bundled file parses to a non-empty mapping
