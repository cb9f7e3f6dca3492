"""The nephron drawing: its boxes are segments of the knowledge, every renal segment can be shown,
and marks read without colour."""

from __future__ import annotations

from tubulo.ui.nephron import drawn_regions, drawn_segments, nephron_canvas, render_rows, site_lists


def _renal(nodes, adjacency):
    """Segments below `kidney` in the part_of tree of the knowledge."""
    out, stack = set(), ["kidney"]
    while stack:
        s = stack.pop()
        for e in (adjacency.get(s) or {}).get("in") or []:
            if e["kind"] == "part_of" and nodes.get(e["from"], {}).get("kind") == "segment" and e["from"] not in out:
                out.add(e["from"])
                stack.append(e["from"])
    return out


def test_every_box_is_a_segment_of_the_knowledge(tables):
    nodes = tables["nodes"]
    for seg in drawn_segments():
        assert nodes[seg]["kind"] == "segment", seg


def test_every_renal_segment_below_the_nephron_can_be_drawn(tables, graph):
    nodes, adj = tables["nodes"], graph["adjacency"]
    renal = _renal(nodes, adj) - {"nephron"}
    assert renal, "the knowledge has no renal segments under 'kidney'"
    for seg in sorted(renal):
        assert drawn_regions(seg, adj), f"{seg} has no box in the drawing"
    assert drawn_regions("proximal_tubule", adj) == {"pt_s1", "pt_s2", "pt_s3"}
    assert drawn_regions("principal_cell", adj) == drawn_regions("collecting_duct", adj)


def test_candidate_segments_are_marked_or_named(tables, graph):
    nodes, adj = tables["nodes"], graph["adjacency"]
    for cid, c in tables["candidates"].items():
        marks, elsewhere = site_lists(c.get("segments") or [], nodes, adj)
        assert len(marks) + len(elsewhere) >= (1 if c.get("segments") else 0), cid


def test_marks_keep_the_width_and_show_as_text():
    plain = ["".join(t for t, _ in row) for row in render_rows(set())]
    marked = ["".join(t for t, _ in row) for row in render_rows({"dct1", "tal"}, {"tal", "ccd"})]
    assert [len(r) for r in plain] == [len(r) for r in marked] == [len(r) for r in nephron_canvas()]
    text = "\n".join(marked)
    assert "»DCT1«" in text and "»TAL◆" in text and "◆CCD◆" in text
    assert "[DCT1]" in "\n".join(plain)
    assert max(len(r) for r in plain) <= 76  # fits an 80-column terminal
