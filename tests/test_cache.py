"""The compiled-knowledge cache: its key follows the knowledge files' content, the stamp only spares
the reading, and a damaged cache costs a rebuild, never a wrong answer."""

from __future__ import annotations

import os
import pickle

import pytest

from tubulo import cache


@pytest.fixture
def folder(tmp_path, monkeypatch):
    kn = tmp_path / "knowledge"
    kn.mkdir()
    (kn / "a.yaml").write_text("a: 1\n")
    (kn / "b.txt").write_text("b\n")
    (kn / "ignored.md").write_text("not knowledge\n")
    monkeypatch.setattr(cache, "knowledge_dir", lambda: kn)
    monkeypatch.setenv("TUBULO_CACHE_DIR", str(tmp_path / "cache"))
    cache.knowledge_hash.cache_clear()
    yield kn
    cache.knowledge_hash.cache_clear()


def _fresh_hash() -> str:
    cache.knowledge_hash.cache_clear()
    return cache.knowledge_hash()


def test_key_is_the_content_hash_and_is_recorded(folder):
    digest = _fresh_hash()
    assert digest == cache.content_hash(folder)
    record = cache.cache_dir() / "knowledge-stamps.pickle"
    with open(record, "rb") as fh:
        assert digest in pickle.load(fh).values()


def test_an_edit_changes_the_key(folder):
    before = _fresh_hash()
    (folder / "a.yaml").write_text("a: 2\n")
    after = _fresh_hash()
    assert after != before
    assert after == cache.content_hash(folder)


def test_an_edit_that_keeps_the_size_changes_the_key(folder):
    before = _fresh_hash()
    path = folder / "a.yaml"
    st = path.stat()
    path.write_text("a: 3\n")  # same size; a later modification time
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns + 1_000_000))
    assert _fresh_hash() != before


def test_a_new_file_changes_the_key_and_other_files_do_not(folder):
    before = _fresh_hash()
    (folder / "notes.md").write_text("still not knowledge\n")
    assert _fresh_hash() == before
    (folder / "c.json").write_text("{}")
    assert _fresh_hash() != before


def test_an_unchanged_stamp_is_answered_from_the_record(folder, monkeypatch):
    digest = _fresh_hash()

    def unread(*_args, **_kwargs):
        raise AssertionError("content hashed although the stamp was unchanged")

    monkeypatch.setattr(cache, "content_hash", unread)
    assert _fresh_hash() == digest


@pytest.mark.parametrize("damage", [b"", b"not a pickle", pickle.dumps(["a", "list"]), pickle.dumps({1: 2})])
def test_a_damaged_record_is_rebuilt(folder, damage):
    digest = _fresh_hash()
    record = cache.cache_dir() / "knowledge-stamps.pickle"
    record.write_bytes(damage)
    assert _fresh_hash() == digest


def test_a_damaged_cache_entry_is_rebuilt(folder):
    calls = []

    def build():
        calls.append(1)
        return {"built": len(calls)}

    cache._MEMORY.clear()
    assert cache.cached("probe", build) == {"built": 1}
    (entry,) = cache.cache_dir().glob("probe-*.pickle")
    entry.write_bytes(b"\x80\x05garbage")
    cache._MEMORY.clear()
    assert cache.cached("probe", build) == {"built": 2}
    cache._MEMORY.clear()
    assert cache.cached("probe", build) == {"built": 2}  # the rebuilt entry is read back
    assert len(calls) == 2
