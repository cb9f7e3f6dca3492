"""The probability chart of the report: one horizontal bar per listed candidate, as inline SVG."""

from __future__ import annotations

from typing import Sequence
from xml.sax.saxutils import escape

from .builder import CandidateRow, percent

__all__ = ["probability_chart_svg"]

_W, _LEFT, _RIGHT, _ROW, _TOP = 720, 34, 70, 34, 26
_MAX_NAME = 104  # characters of a name written above its bar; the table beside it has the whole name


def _short(name: str) -> str:
    return name if len(name) <= _MAX_NAME else name[: _MAX_NAME - 1].rstrip() + "\u2026"


def probability_chart_svg(rows: Sequence[CandidateRow]) -> str:
    """Bars scaled 0-100 %; each bar has its rank, name and value written out (reads in black and white)."""
    span = _W - _LEFT - _RIGHT
    height = _TOP + _ROW * len(rows) + 10
    out = [f'<svg viewBox="0 0 {_W} {height}" width="{_W}" height="{height}" '
           'role="img" class="chart" aria-labelledby="chart-title" font-family="sans-serif">',
           '<title id="chart-title">Probability of each listed candidate</title>']
    for tick in (0, 25, 50, 75, 100):
        x = _LEFT + span * tick / 100
        out.append(f'<line x1="{x:.1f}" y1="{_TOP - 6}" x2="{x:.1f}" y2="{height - 6}" stroke="#c9c4b8" '
                   'stroke-width="1" stroke-dasharray="2 3"/>')
        out.append(f'<text x="{x:.1f}" y="{_TOP - 10}" font-size="10" text-anchor="middle" fill="#4a4538">{tick} %</text>')
    for i, r in enumerate(rows):
        y = _TOP + _ROW * i
        w = max(span * r.probability, 1.5 if r.probability > 0 else 0)
        out.append(f'<text x="4" y="{y + 24}" font-size="11" font-weight="bold" fill="#000000">{r.rank}</text>')
        out.append(f'<text x="{_LEFT}" y="{y + 11}" font-size="10.5" fill="#1f1f1f">{escape(_short(r.name))}</text>')
        out.append(f'<rect x="{_LEFT}" y="{y + 15}" width="{w:.1f}" height="12" fill="#3d4f66" stroke="#000000" '
                   'stroke-width="0.8"/>')
        out.append(f'<text x="{_LEFT + w + 5:.1f}" y="{y + 25}" font-size="10.5" fill="#000000">'
                   f'{escape(percent(r.probability))}</text>')
    out.append("</svg>")
    return "\n".join(out)
