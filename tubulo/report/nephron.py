"""The nephron map of the report: tubulo's own schematic drawing of one nephron and its collecting
duct, with the segments named by the leading candidates marked and labelled.

Every drawn part carries a segment id of `knowledge/segments.yaml`; a candidate's segment is placed
on the drawing through that file's `part_of` tree (a whole that is drawn by its pieces marks all
the pieces; a cell type without a piece of its own marks the unit that holds it).
"""

from __future__ import annotations

from typing import Iterable, Mapping, NamedTuple
from xml.sax.saxutils import escape, quoteattr

__all__ = ["Part", "PARTS", "DRAWN", "Placement", "place_segments", "nephron_svg"]


class Part(NamedTuple):
    """One drawn piece of the schematic: a segment id, its outline and where its label sits."""

    id: str
    d: str  # SVG path data
    width: float  # tube width in drawing units
    label: str  # short label written on the drawing
    lx: float
    ly: float
    anchor: str = "start"  # start | middle | end


# The drawing (800 x 520 units).  Cortex above y=250, outer medulla 250-390, inner medulla below.
# Proportions and course are schematic: the anatomy is common practice, no source.
PARTS: tuple[Part, ...] = (
    Part("glomerulus", "M 120 84 A 36 36 0 1 0 120.01 84", 0, "Glomerulus", 14, 184, "start"),
    Part("pt_s1", "M 120 156 C 120 192 168 204 174 178 C 180 150 214 148 216 178", 9, "PT S1", 150, 228, "middle"),
    Part("pt_s2", "M 216 178 C 218 210 252 214 256 186 C 260 160 292 160 294 192 L 300 236", 9, "PT S2", 246, 148,
         "middle"),
    Part("pt_s3", "M 300 236 L 300 300", 9, "PT S3 (straight)", 292, 282, "end"),
    Part("tdl", "M 300 300 L 300 468", 4, "Thin descending limb", 292, 430, "end"),
    Part("tal_thin", "M 300 468 Q 300 496 320 496 Q 340 496 340 468 L 340 390", 4, "Thin ascending limb", 350, 452,
         "start"),
    Part("tal", "M 340 390 L 340 122 Q 340 90 308 90 L 182 90", 9, "Thick ascending limb", 350, 300, "start"),
    Part("macula_densa", "M 182 90 L 164 90", 13, "Macula densa", 186, 112, "start"),
    Part("dct1", "M 164 90 C 150 62 168 36 200 40 C 226 44 236 24 262 30", 9, "DCT1", 200, 17, "middle"),
    Part("dct2", "M 262 30 C 292 36 298 64 330 54 C 352 47 362 40 384 44", 9, "DCT2", 330, 32, "middle"),
    Part("cnt", "M 384 44 C 420 50 440 72 480 72 L 556 70", 9, "Connecting tubule", 360, 134, "start"),
    Part("ccd", "M 560 30 L 560 250", 12, "Cortical CD", 578, 160, "start"),
    Part("omcd", "M 560 250 L 560 390", 12, "Outer medullary CD", 578, 322, "start"),
    Part("imcd", "M 560 390 L 560 492", 12, "Inner medullary CD", 578, 446, "start"),
)

DRAWN: frozenset[str] = frozenset(p.id for p in PARTS)


class Placement(NamedTuple):
    """Where a list of segments lands on the drawing.

    `parts` maps each drawn part to the candidate ranks that implicate it; `outside` names the
    segments that lie outside the kidney, `undrawn` the renal ones the drawing has no piece for.
    """

    parts: tuple[tuple[str, tuple[int, ...]], ...]
    outside: tuple[tuple[str, tuple[int, ...]], ...]
    undrawn: tuple[tuple[str, tuple[int, ...]], ...]


def _root(seg: str, part_of: Mapping[str, str | None]) -> str:
    seen = set()
    while part_of.get(seg) and seg not in seen:
        seen.add(seg)
        seg = part_of[seg]  # type: ignore[assignment]
    return seg


def _ancestors(seg: str, part_of: Mapping[str, str | None]) -> list[str]:
    out, seen = [], {seg}
    while part_of.get(seg) and part_of[seg] not in seen:
        seg = part_of[seg]  # type: ignore[assignment]
        seen.add(seg)
        out.append(seg)
    return out


def drawn_parts(seg: str, part_of: Mapping[str, str | None]) -> tuple[str, ...]:
    """The drawn parts that stand for one segment id (empty when the drawing has none)."""
    if seg in DRAWN:
        return (seg,)
    below = tuple(p.id for p in PARTS if seg in _ancestors(p.id, part_of))
    if below:
        return below
    parent = part_of.get(seg)
    # climb one level to the unit that holds a cell type, but never to a root (the whole kidney)
    if parent and part_of.get(parent):
        return drawn_parts(parent, part_of)
    return ()


def place_segments(marked: Iterable[tuple[int, Iterable[str]]], part_of: Mapping[str, str | None]) -> Placement:
    """Place (rank, segment ids) pairs on the drawing; ranks per part are sorted and unique."""
    kidney_roots = {_root(p.id, part_of) for p in PARTS}
    on: dict[str, set[int]] = {}
    outside: dict[str, set[int]] = {}
    undrawn: dict[str, set[int]] = {}
    for rank, segs in marked:
        for seg in segs:
            parts = drawn_parts(seg, part_of)
            if parts:
                for p in parts:
                    on.setdefault(p, set()).add(rank)
            elif _root(seg, part_of) not in kidney_roots:
                outside.setdefault(seg, set()).add(rank)
            else:
                undrawn.setdefault(seg, set()).add(rank)
    order = [p.id for p in PARTS]
    return Placement(
        parts=tuple((p, tuple(sorted(on[p]))) for p in order if p in on),
        outside=tuple((s, tuple(sorted(r))) for s, r in outside.items()),
        undrawn=tuple((s, tuple(sorted(r))) for s, r in undrawn.items()),
    )


def _ranks(ranks: tuple[int, ...]) -> str:
    return ", ".join(str(r) for r in ranks)


def _label_width(text: str, size: float) -> float:
    return 0.6 * size * len(text) + 8  # rough width of a sans-serif line: enough for a tag box


def nephron_svg(placement: Placement, title: str = "Nephron map") -> str:
    """The schematic as an inline <svg> element for HTML (well-formed XML, no external references)."""
    marked = dict(placement.parts)
    out: list[str] = [
        '<svg viewBox="0 0 800 520" width="800" height="520" role="img" '
        f'class="nephron" aria-labelledby="nephron-title" font-family="sans-serif">',
        f'<title id="nephron-title">{escape(title)}</title>',
        "<defs>",
        '<pattern id="nm-hatch" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)">'
        '<rect width="6" height="6" fill="#ffffff"/><line x1="0" y1="0" x2="0" y2="6" stroke="#202020" stroke-width="2.4"/>'
        "</pattern>",
        "</defs>",
        # zones
        '<rect x="0" y="0" width="800" height="250" fill="#fbf8f1"/>',
        '<rect x="0" y="250" width="800" height="140" fill="#f1ede4"/>',
        '<rect x="0" y="390" width="800" height="130" fill="#e6e1d6"/>',
        '<line x1="0" y1="250" x2="800" y2="250" stroke="#7a7466" stroke-width="1" stroke-dasharray="6 4"/>',
        '<line x1="0" y1="390" x2="800" y2="390" stroke="#7a7466" stroke-width="1" stroke-dasharray="6 4"/>',
        '<text x="8" y="242" font-size="11" font-style="italic" fill="#4a4538">Cortex</text>',
        '<text x="8" y="382" font-size="11" font-style="italic" fill="#4a4538">Outer medulla</text>',
        '<text x="8" y="512" font-size="11" font-style="italic" fill="#4a4538">Inner medulla</text>',
        # arterioles at the vascular pole and the capillary tuft
        '<path d="M 48 24 L 102 88" stroke="#6b6b6b" stroke-width="5" fill="none" stroke-linecap="round"/>',
        '<path d="M 104 14 L 116 84" stroke="#6b6b6b" stroke-width="4" fill="none" stroke-linecap="round"/>',
        '<text x="12" y="18" font-size="9" fill="#4a4538">afferent</text>',
        '<text x="110" y="12" font-size="9" fill="#4a4538">efferent</text>',
        # other nephrons draining into the collecting duct, and its outflow
        '<path d="M 600 12 C 580 14 564 18 560 30" stroke="#9a9a9a" stroke-width="5" fill="none" stroke-dasharray="3 3"/>',
        '<text x="606" y="16" font-size="9" fill="#4a4538">from other nephrons</text>',
        '<text x="578" y="44" font-size="10" fill="#3f3f3f">CD: collecting duct</text>',
        '<path d="M 560 492 L 560 512 M 552 504 L 560 514 L 568 504" stroke="#4a4a4a" stroke-width="2" fill="none"/>',
        '<text x="572" y="512" font-size="9" fill="#4a4538">to the renal pelvis</text>',
    ]
    # halos under the implicated parts first, so that the tubes are drawn over them
    for p in PARTS:
        if p.id in marked:
            if p.id == "glomerulus":
                out.append(f'<circle cx="120" cy="120" r="45" fill="url(#nm-hatch)" stroke="#000000" stroke-width="2"/>')
            else:
                out.append(f'<path d="{p.d}" fill="none" stroke="#000000" stroke-width="{p.width + 12:g}" '
                           'stroke-linecap="butt" stroke-linejoin="round"/>')
                out.append(f'<path d="{p.d}" fill="none" stroke="url(#nm-hatch)" stroke-width="{p.width + 8:g}" '
                           'stroke-linecap="butt" stroke-linejoin="round"/>')
    for p in PARTS:
        hit = p.id in marked
        group = f'<g data-segment={quoteattr(p.id)} data-marked="{"yes" if hit else "no"}">'
        out.append(group)
        if p.id == "glomerulus":
            out.append('<circle cx="120" cy="120" r="36" fill="#ffffff" stroke="#3a3a3a" stroke-width="3"/>')
            for cx, cy in ((108, 110), (126, 104), (136, 122), (118, 130), (104, 126), (122, 118)):
                out.append(f'<circle cx="{cx}" cy="{cy}" r="7" fill="none" stroke="#8a2f2f" stroke-width="2"/>')
        elif p.id == "macula_densa":
            out.append(f'<path d="{p.d}" fill="none" stroke="#3a3a3a" stroke-width="{p.width:g}" stroke-linecap="butt"/>')
            for x in (167, 172, 177):
                out.append(f'<circle cx="{x}" cy="90" r="1.8" fill="#ffffff"/>')
        else:
            out.append(f'<path d="{p.d}" fill="none" stroke="#3a3a3a" stroke-width="{p.width:g}" '
                       'stroke-linecap="butt" stroke-linejoin="round"/>')
            if p.width >= 8:
                out.append(f'<path d="{p.d}" fill="none" stroke="#ffffff" stroke-width="{p.width - 5:g}" '
                           'stroke-linecap="butt" stroke-linejoin="round"/>')
        out.append("</g>")
    for p in PARTS:
        ranks = marked.get(p.id)
        if ranks:
            text = f"{p.label} \u25c6 {_ranks(ranks)}"
            w = _label_width(text, 12.5)
            x0 = {"start": p.lx - 4, "middle": p.lx - w / 2, "end": p.lx - w + 4}[p.anchor]
            out.append(f'<rect x="{x0:.1f}" y="{p.ly - 13:.1f}" width="{w:.1f}" height="17" fill="#ffffff" '
                       'stroke="#000000" stroke-width="1.5"/>')
            out.append(f'<text x="{p.lx:g}" y="{p.ly:g}" font-size="12.5" font-weight="bold" text-anchor="{p.anchor}" '
                       f'fill="#000000">{escape(text)}</text>')
        else:
            out.append(f'<text x="{p.lx:g}" y="{p.ly:g}" font-size="12" text-anchor="{p.anchor}" '
                       f'fill="#3f3f3f">{escape(p.label)}</text>')
    out.append("</svg>")
    return "\n".join(out)
