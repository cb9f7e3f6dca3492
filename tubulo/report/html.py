"""The report as one self-contained HTML page: inline CSS and SVG only, no scripts, fonts, images or
links to fetch; laid out for the screen and for A4 paper."""

from __future__ import annotations

from html import escape as _esc

from .builder import (SECTIONS, CandidateEvidence, CautionItem, EvidenceItem, Fact, Report, percent)
from .chart import probability_chart_svg
from .nephron import nephron_svg

__all__ = ["render_html"]

_CSS = """
:root { --ink: #1b1b1b; --muted: #5b5648; --rule: #cfc9bb; --paper: #ffffff; --band: #f6f3ec; --alarm: #8c0f0f; }
* { box-sizing: border-box; }
html { font-size: 10.5pt; }
body { margin: 0 auto; max-width: 190mm; padding: 10mm 6mm; color: var(--ink); background: var(--paper);
       font-family: "Liberation Sans", "DejaVu Sans", Arial, Helvetica, sans-serif; line-height: 1.35; }
header.masthead { border-bottom: 3px solid var(--ink); padding-bottom: 4px; margin-bottom: 10px; }
header.masthead h1 { font-size: 17pt; margin: 0 0 2px 0; letter-spacing: 0.01em; }
header.masthead p { margin: 0; color: var(--muted); }
h2 { font-size: 12.5pt; margin: 16px 0 6px 0; padding: 2px 0 2px 6px; border-left: 6px solid var(--ink);
     background: var(--band); break-after: avoid; page-break-after: avoid; }
h3 { font-size: 11pt; margin: 10px 0 4px 0; break-after: avoid; page-break-after: avoid; }
p.lead, p.note { margin: 4px 0; }
p.note { color: var(--muted); font-size: 9pt; }
table { border-collapse: collapse; width: 100%; table-layout: fixed; margin: 4px 0 8px 0; font-size: 9pt; }
th, td { border: 1px solid var(--rule); padding: 2px 4px; text-align: left; vertical-align: top;
         overflow-wrap: anywhere; word-break: normal; }
thead th { background: var(--band); font-weight: bold; }
thead { display: table-header-group; }
tr, li.item, .critical-box, figure, dl.facts div { break-inside: avoid; page-break-inside: avoid; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
td.flag-out { font-weight: bold; }
tr.critical-row td { border-top: 2px solid var(--alarm); border-bottom: 2px solid var(--alarm); font-weight: bold; }
.critical-box { border: 4px double var(--alarm); padding: 6px 8px; margin: 6px 0; background: #fff4f2; }
.critical-box .banner { font-size: 13pt; font-weight: bold; text-transform: uppercase; letter-spacing: 0.04em;
                        color: var(--alarm); margin: 0 0 4px 0; }
.critical-box ol { margin: 0; padding-left: 22px; }
.critical-box li { font-weight: bold; font-size: 11pt; margin: 2px 0; }
.critical-box .src { font-weight: normal; font-size: 9pt; color: var(--ink); display: block; }
ul.cautions { list-style: none; padding: 0; margin: 4px 0; }
ul.cautions li { margin: 3px 0; padding-left: 8px; border-left: 3px solid var(--rule); }
ul.cautions li.warning { border-left: 3px solid var(--ink); }
.tag { display: inline-block; font-size: 8pt; font-weight: bold; text-transform: uppercase; border: 1px solid var(--ink);
       padding: 0 3px; margin-right: 4px; letter-spacing: 0.03em; }
.src { color: var(--muted); font-size: 8.5pt; }
.standing { border: 1.5px solid var(--ink); padding: 4px 6px; margin: 6px 0; font-weight: bold; }
dl.facts { display: grid; grid-template-columns: 34% 66%; margin: 4px 0; font-size: 9.5pt; }
dl.facts div { display: contents; }
dl.facts dt { font-weight: bold; padding: 1px 6px 1px 0; border-bottom: 1px dotted var(--rule); }
dl.facts dd { margin: 0; padding: 1px 0; border-bottom: 1px dotted var(--rule); overflow-wrap: anywhere; }
figure { margin: 6px 0 10px 0; }
figure svg { width: 100%; height: auto; display: block; }
figcaption { font-size: 9pt; color: var(--muted); margin-top: 3px; }
ol.path { margin: 1px 0 4px 0; padding-left: 4px; font-size: 8.8pt; list-style: none; }
ol.path li { margin: 0; }
.sign { display: inline-block; min-width: 1.3em; font-weight: bold; text-align: center; border: 1px solid var(--muted);
        margin-right: 3px; font-size: 8pt; }
section.candidate { border-top: 1px solid var(--ink); padding-top: 4px; margin-top: 8px; }
ul.evidence { margin: 2px 0 6px 0; padding-left: 18px; }
ul.evidence > li { margin: 3px 0; }
.genes { font-family: "DejaVu Sans Mono", "Liberation Mono", monospace; font-size: 9pt; }
footer { margin-top: 14px; }
@page { size: A4; margin: 14mm 12mm 16mm 12mm; }
@media print {
  html { font-size: 9.5pt; }
  body { max-width: none; padding: 0; }
  h2 { background: none; }
  section#differential, section#evidence, section#nephron { break-before: page; page-break-before: always; }
  .critical-box { background: none; }
}
"""

_SIGN = {1: ("+", "same direction as the step before"), -1: ("\u2212", "opposite direction to the step before")}


def _e(x: object) -> str:
    return _esc("" if x is None else str(x), quote=True)


def _facts(facts: tuple[Fact, ...] | list[Fact]) -> str:
    rows = "".join(f"<div><dt>{_e(f.label)}</dt><dd>{_e(f.value)}</dd></div>" for f in facts)
    return f'<dl class="facts">{rows}</dl>'


def _table(head: list[tuple[str, str]], body: list[str]) -> str:
    cols = "".join(f'<col style="width:{w}">' for _, w in head)
    ths = "".join(f"<th>{_e(h)}</th>" for h, _ in head)
    return f"<table><colgroup>{cols}</colgroup><thead><tr>{ths}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _section(anchor: str, inner: str) -> str:
    heading = dict(SECTIONS)[anchor]
    return f'<section id="{anchor}"><h2>{_e(heading)}</h2>\n{inner}\n</section>'


def _cautions(r: Report) -> str:
    parts = []
    if r.critical:
        items = "".join(f'<li>\u26a0 CRITICAL: {_e(c.message)}<span class="src">{_e(c.source)}</span></li>'
                        for c in r.critical)
        n = len(r.critical)
        parts.append(f'<div class="critical-box" role="alert"><p class="banner">\u26a0 Critical value{"s" if n > 1 else ""}'
                     f" ({n}): act now under the local protocol</p><ol>{items}</ol></div>")
    else:
        parts.append('<p class="lead">No value in this case is past a critical limit known to tubulo; '
                     "the local laboratory's critical-value list still applies.</p>")
    items = []
    for c in r.cautions:
        src = f' <span class="src">({_e(c.source)})</span>' if c.source else ""
        items.append(f'<li class="{_e(c.level)}"><span class="tag">{_e(c.level)}</span>{_e(c.message)}{src}</li>')
    parts.append(f'<ul class="cautions">{"".join(items)}</ul>')
    return _section("cautions", "\n".join(parts))


def _measurements(r: Report) -> str:
    if not r.measurements:
        return _section("measurements", '<p class="lead">No measurements in the case.</p>')
    body = []
    for m in r.measurements:
        flag = m.flag
        if m.critical:
            flag = f"\u26a0 CRITICAL ({m.flag})" if m.flag else "\u26a0 CRITICAL"
        cls = ' class="critical-row"' if m.critical else ""
        fcls = ' class="flag-out"' if m.flag in ("LOW", "HIGH") or m.critical else ""
        ref = _e(m.reference) + (f'<br><span class="src">{_e(m.reference_source)}</span>' if m.reference_source else "")
        note = f'<br><span class="src">{_e(m.note)}</span>' if m.note else ""
        body.append(f"<tr{cls}><td>{_e(m.label)}<br><span class=\"src\">{_e(m.key)}</span></td><td>{_e(m.given)}{note}</td>"
                    f'<td class="num">{_e(m.value)}</td><td>{_e(m.unit)}</td><td>{ref}</td><td{fcls}>{_e(flag)}</td></tr>')
    head = [("Analyte", "24%"), ("As given", "15%"), ("Value", "9%"), ("Unit", "10%"), ("Reference", "28%"),
            ("Flag", "14%")]
    return _section("measurements", _table(head, body))


def _derived(r: Report) -> str:
    body = []
    for d in r.derived:
        inputs = ", ".join(f"{i.label} {i.value}" for i in d.inputs)
        state = "valid" if d.valid else f"not valid: {d.reason}"
        body.append(f"<tr><td>{_e(d.label)}<br><span class=\"src\">{_e(d.id)}</span></td>"
                    f'<td class="num">{_e(d.value)} {_e(d.unit)}</td><td>{_e(d.formula)}<br><span class="src">inputs: '
                    f'{_e(inputs) or "-"}</span></td><td>{_e(d.source)}</td><td>{_e(state)}</td></tr>')
    parts = []
    if body:
        head = [("Index", "20%"), ("Value", "11%"), ("Formula and inputs", "39%"), ("Source", "16%"), ("Use", "14%")]
        parts.append(_table(head, body))
    else:
        parts.append('<p class="lead">No index could be computed from this case.</p>')
    if r.not_computed:
        names = "; ".join(f.label for f in r.not_computed)
        parts.append(f'<p class="note">Not computable from this case ({len(r.not_computed)}): {_e(names)}.</p>')
    return _section("derived", "\n".join(parts))


def _findings(r: Report) -> str:
    if not r.findings:
        return _section("findings", '<p class="lead">No findings.</p>')
    body = [f"<tr><td>{_e(f.label)}</td><td>{_e(f.state)}</td><td>{_e(f.code)}</td><td>{_e(f.basis)}</td></tr>"
            for f in r.findings]
    return _section("findings", _table([("Finding", "34%"), ("State", "14%"), ("HPO", "14%"), ("From", "38%")], body))


def _differential(r: Report) -> str:
    body = []
    for c in r.candidates:
        genes = ", ".join(c.genes) or "-"
        xrefs = ", ".join(c.xrefs)
        body.append(f'<tr><td class="num">{c.rank}</td><td>{_e(c.name)}<br><span class="src">{_e(c.id)}'
                    f'{" · " + _e(xrefs) if xrefs else ""}</span></td><td>{_e(c.kind)}</td>'
                    f'<td class="genes">{_e(genes)}</td><td class="num">{_e(percent(c.probability))}</td></tr>')
    head = [("#", "5%"), ("Candidate", "51%"), ("Kind", "12%"), ("Genes", "18%"), ("Probability", "14%")]
    lead = (f'<p class="lead">The {len(r.candidates)} most probable of {r.total_candidates} candidate explanations; '
            f"the others hold {_e(percent(r.rest_probability))} together. Probabilities are relative to tubulo's "
            "list and assume one main cause.</p>")
    chart = (f'<figure class="chart">{probability_chart_svg(r.candidates)}'
             "<figcaption>Probability of each listed candidate (bar length, value written beside it).</figcaption></figure>")
    return _section("differential", lead + chart + _table(head, body))


def _path(item: EvidenceItem, c: CandidateEvidence) -> str:
    if not item.path:
        return ""
    steps = []
    for s in item.path:
        mark, meaning = _SIGN.get(s.sign, ("?", "direction not fixed"))
        extra = " · ".join(x for x in (s.kind, s.edge) if x)
        note = f" — {_e(s.note)}" if s.note else ""
        src = f' <span class="src">[{_e(s.source)}]</span>' if s.source else ""
        steps.append(f'<li><span class="sign" title="{_e(meaning)}">{mark}</span>{_e(s.label)} '
                     f'<span class="src">({_e(extra)})</span>{note}{src}</li>')
    return f'<ol class="path">{"".join(steps)}</ol>'


def _evidence_list(items: tuple[EvidenceItem, ...], c: CandidateEvidence) -> str:
    lis = []
    for e in items:
        lis.append(f'<li class="item"><b>{_e(e.label)}</b>: {_e(e.state)} '
                   f'<span class="src">(log LR {e.log_lr:+.2f}; {_e(e.basis)})</span>{_path(e, c)}</li>')
    return f'<ul class="evidence">{"".join(lis)}</ul>'


def _evidence(r: Report) -> str:
    if not r.evidence:
        return _section("evidence", '<p class="lead">No candidate explained in detail.</p>')
    parts = ['<p class="note">Weights are natural-log likelihood ratios. A causal path runs from the candidate '
             "to the finding; each step is marked + when it moves the same way as the step before it and "
             "\u2212 when it moves the opposite way; the source of each link is in brackets.</p>"]
    for c in r.evidence:
        block = [f'<section class="candidate"><h3>{c.rank}. {_e(c.name)} — {_e(percent(c.probability))} '
                 f'<span class="src">({_e(c.kind)})</span></h3>']
        if c.segments:
            block.append(f'<p class="note">Segments: {_e("; ".join(c.segments))}</p>')
        if c.prior_notes:
            block.append(f'<p class="note">Prior: {_e("; ".join(c.prior_notes))}</p>')
        block.append("<p><b>For</b></p>" + (_evidence_list(c.support, c) if c.support else '<p class="note">nothing</p>'))
        block.append("<p><b>Against</b></p>" + (_evidence_list(c.against, c) if c.against else '<p class="note">nothing</p>'))
        if c.unexplained:
            block.append(f'<p><b>Not explained by this candidate:</b> {_e("; ".join(c.unexplained))}</p>')
        block.append("</section>")
        parts.append("\n".join(block))
    return _section("evidence", "\n".join(parts))


def _nephron(r: Report) -> str:
    n = r.nephron
    svg = nephron_svg(n.placement, title=f"Nephron map: segments named by candidates 1-{len(n.legend)}")
    legend = _facts(n.legend) if n.legend else '<p class="note">No candidate to map.</p>'
    extra = []
    if n.outside:
        extra.append("Outside the kidney (not drawn): " + "; ".join(f"{f.label} ({f.value})" for f in n.outside) + ".")
    if n.undrawn:
        extra.append("Renal sites without a piece in the drawing: " + "; ".join(f"{f.label} ({f.value})" for f in n.undrawn) + ".")
    cap = ("Schematic, not to scale. A heavy hatched outline and a boxed bold label with \u25c6 and numbers mark "
           "a segment named by those candidates of the differential; unmarked segments have plain labels.")
    extra_html = "".join(f'<p class="note">{_e(x)}</p>' for x in extra)
    return _section("nephron", f'<figure class="nephron">{svg}<figcaption>{_e(cap)}</figcaption></figure>'
                               f"{legend}{extra_html}")


def _next_tests(r: Report) -> str:
    if not r.next_tests:
        return _section("next-tests", '<p class="lead">No further test separates the leading candidates '
                                      "by a useful margin in tubulo's knowledge.</p>")
    body = [f"<tr><td>{_e(t.test)}</td><td>{_e(t.cost)}</td><td class=\"num\">{t.bits:.2f}</td>"
            f"<td>{_e('; '.join(t.separates))}</td></tr>" for t in r.next_tests]
    lead = ('<p class="note">Ordered by the expected information gain over the current differential (bits); '
            "the tier says how easy the test is to get.</p>")
    return _section("next-tests", lead + _table([("Test", "32%"), ("Tier", "10%"), ("Bits", "8%"),
                                                  ("Helps separate", "50%")], body))


def _panel(r: Report) -> str:
    p = r.panel
    if not p.cover:
        return _section("panel", '<p class="lead">No inherited candidate with a known gene carries weight here; '
                                 "no panel suggested.</p>")
    lead = (f'<p class="lead">Inherited causes hold {_e(percent(p.inherited_mass))} of the probability. '
            f"{_genes_cover(len(p.cover))} {_e(percent(p.covered))} of that inherited share "
            f"(target {_e(percent(p.target))}; {p.listed} genes carry any share).</p>")
    body = [f'<tr><td class="genes">{_e(g)}</td><td class="num">{_e(percent(m))}</td></tr>' for g, m in p.cover]
    return _section("panel", lead + _table([("Gene (HGNC)", "50%"), ("Share of the inherited probability", "50%")], body))


def _about(r: Report) -> str:
    facts = list(r.versions) + [Fact("Prepared", r.date)]
    return (f'<footer><section id="about"><h2>{_e(dict(SECTIONS)["about"])}</h2>{_facts(facts)}'
            f'<p class="standing">{_e(r.standing)}</p></section></footer>')


def _genes_cover(n: int) -> str:
    return "This gene covers" if n == 1 else f"These {n} genes cover"


def render_html(r: Report) -> str:
    """The whole page as a string."""
    crit = f" — {len(r.critical)} CRITICAL" if r.critical else ""
    head = (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'\">\n"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
        f"<title>Tubule work-up report: {_e(r.case_id)}{_e(crit)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n"
        f'<header class="masthead"><h1>Tubule work-up report</h1><p>Case <b>{_e(r.case_id)}</b> · prepared {_e(r.date)}'
        f" · tubulo {_e(dict((f.label, f.value) for f in r.versions).get('tubulo', ''))} · decision support, "
        "not a diagnosis</p></header>\n<main>\n"
    )
    body = [
        _cautions(r),
        _section("case", _facts(r.case_facts)),
        _measurements(r),
        _derived(r),
        _findings(r),
        _differential(r),
        _evidence(r),
        _nephron(r),
        _next_tests(r),
        _panel(r),
    ]
    return head + "\n".join(body) + "\n</main>\n" + _about(r) + "\n</body>\n</html>\n"
