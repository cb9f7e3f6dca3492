"""The nephron drawn in the terminal: a schematic of our own, one labelled box per segment, with the
segments of chosen candidates (and of a drug in the forward view) marked.  No Textual import here.

The drawing is a small character canvas; each box remembers the segment id (from segments.yaml) it
stands for, so marking is a matter of restyling those cells.  A segment that is not drawn is shown
through the drawn segments below it (`part_of` in the knowledge graph: proximal_tubule -> S1, S2,
S3), or else through its parent (principal cell -> collecting duct).
"""

from __future__ import annotations

from functools import cache
from typing import Any, Iterable, Mapping, NamedTuple

__all__ = ["MapCell", "drawn_segments", "drawn_regions", "nephron_canvas", "render_rows", "site_lists"]

# column of the descending limb, the ascending limb and the collecting duct
_A, _B, _C = 3, 42, 71
_WIDTH = 75


class MapCell(NamedTuple):
    char: str
    region: str | None = None  # segment id when the cell belongs to a box
    zone: bool = False  # a zone line (cortex / medulla boundaries)


class _Canvas:
    def __init__(self, rows: int, width: int):
        self.cells = [[MapCell(" ") for _ in range(width)] for _ in range(rows)]

    def put(self, row: int, col: int, text: str, region: str | None = None, zone: bool = False) -> None:
        for i, ch in enumerate(text):
            if 0 <= col + i < len(self.cells[row]):
                self.cells[row][col + i] = MapCell(ch, region, zone)

    def box(self, row: int, col: int, label: str, region: str, round_: bool = False) -> None:
        self.put(row, col, ("(" if round_ else "[") + label + (")" if round_ else "]"), region)


@cache
def nephron_canvas() -> tuple[tuple[MapCell, ...], ...]:
    """The drawing as rows of cells (cortex on top, inner medulla at the bottom)."""
    c = _Canvas(12, _WIDTH)
    c.put(0, 1, "cortex", zone=True)
    c.put(1, _A, "╔══")
    c.box(1, 6, "PT S2", "pt_s2")
    c.put(1, 13, "══")
    c.box(1, 15, "PT S1", "pt_s1")
    c.put(1, 22, "══")
    c.box(1, 24, "glomerulus", "glomerulus", round_=True)
    c.put(2, _A, "║")
    c.box(2, 25, "JG cells", "juxtaglomerular_cell")
    c.put(2, 35, "·")
    c.box(2, 36, "macula densa", "macula_densa")
    c.put(2, 50, "═")
    c.box(2, 51, "DCT1", "dct1")
    c.put(2, 57, "═")
    c.box(2, 58, "DCT2", "dct2")
    c.put(2, 64, "═")
    c.box(2, 65, "CNT", "cnt")
    c.put(2, 70, "═╗")
    c.box(3, 0, "PT S3", "pt_s3")
    c.put(3, _B, "║")
    c.put(3, _C, "║")
    c.put(4, _A, "║")
    c.box(4, _B - 2, "TAL", "tal")
    c.box(4, _C - 2, "CCD", "ccd")
    for row, name in ((5, "outer medulla"), (8, "inner medulla")):
        c.put(row, 0, "┈" * _WIDTH, zone=True)
        c.put(row, 8, f" {name} ", zone=True)
        for col in (_A, _B, _C):
            c.put(row, col, "║")
    c.box(6, _A - 2, "TDL", "tdl")
    c.box(6, _B - 2, "TAL", "tal")
    c.box(6, _C - 3, "OMCD", "omcd")
    c.put(7, _A, "║")
    c.put(7, _B, "║")
    c.box(7, 52, "interstitium", "medullary_interstitium", round_=True)
    c.put(7, _C, "║")
    c.box(9, _A - 2, "TDL", "tdl")
    c.box(9, _B - 4, "thin AL", "tal_thin")
    c.box(9, _C - 3, "IMCD", "imcd")
    c.put(10, _A, "╚" + "═" * (_B - _A - 1) + "╝")
    c.put(10, _C, "║")
    c.put(11, _C - 6, "urine ▼")
    return tuple(tuple(r) for r in c.cells)


@cache
def drawn_segments() -> frozenset[str]:
    """The segment ids that have a box in the drawing."""
    return frozenset(cell.region for row in nephron_canvas() for cell in row if cell.region)



def drawn_regions(segment: str, adjacency: Mapping[str, Any] | None) -> frozenset[str]:
    """The drawn boxes that stand for `segment`: itself, else the drawn parts below it, else its parent's."""
    drawn = drawn_segments()
    if segment in drawn:
        return frozenset({segment})
    if not adjacency:
        return frozenset()

    def children(seg: str) -> list[str]:
        return [e["from"] for e in (adjacency.get(seg) or {}).get("in") or [] if e.get("kind") == "part_of"]

    found: set[str] = set()
    stack, seen = [segment], {segment}
    while stack:
        s = stack.pop()
        for ch in children(s):
            if ch in seen:
                continue
            seen.add(ch)
            if ch in drawn:
                found.add(ch)
            else:
                stack.append(ch)
    if found:
        return frozenset(found)
    for e in (adjacency.get(segment) or {}).get("out") or []:
        if e.get("kind") == "part_of" and e["to"] not in ("nephron", "kidney"):
            return drawn_regions(e["to"], adjacency)
    return frozenset()


def site_lists(segments: Iterable[str], nodes: Mapping[str, Any], adjacency: Mapping[str, Any] | None
               ) -> tuple[frozenset[str], tuple[str, ...]]:
    """(drawn boxes to mark, labels of the sites that cannot be drawn: outside the kidney, whole kidney)."""
    marks: set[str] = set()
    elsewhere: list[str] = []
    for seg in segments:
        regions = drawn_regions(seg, adjacency)
        if regions:
            marks |= regions
        else:
            label = str((nodes.get(seg) or {}).get("label") or seg)
            if label not in elsewhere:
                elsewhere.append(label)
    return frozenset(marks), tuple(elsewhere)


def render_rows(candidate_marks: frozenset[str] | set[str], drug_marks: frozenset[str] | set[str] = frozenset()
                ) -> list[list[tuple[str, str]]]:
    """The drawing as rows of (text, role) runs; role is "", "zone", "box", "mark", "drug" or "both".

    A marked box keeps its label and trades its brackets for text markers (»…« a candidate, ◆…◆ the
    drug, »…◆ both), so the marking reads without colour."""
    out: list[list[tuple[str, str]]] = []
    for row in nephron_canvas():
        runs: list[tuple[str, str]] = []
        i = 0
        while i < len(row):
            cell = row[i]
            if cell.region:
                j = i
                while j < len(row) and row[j].region == cell.region and (j == i or row[j - 1].char not in "])"):
                    j += 1
                text = "".join(c.char for c in row[i:j])
                cand = cell.region in candidate_marks
                drug = cell.region in drug_marks
                if cand or drug:
                    left = "»" if cand else "◆"
                    right = "◆" if drug else "«"
                    text = left + text[1:-1] + right
                    role = "both" if cand and drug else ("mark" if cand else "drug")
                else:
                    role = "box"
                runs.append((text, role))
                i = j
                continue
            j = i
            while j < len(row) and not row[j].region and row[j].zone == cell.zone:
                j += 1
            runs.append(("".join(c.char for c in row[i:j]), "zone" if cell.zone else ""))
            i = j
        out.append(runs)
    return out
