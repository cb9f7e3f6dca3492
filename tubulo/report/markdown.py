"""The report as Markdown: the same sections as the HTML page, tables as pipe tables, the drawings
replaced by fenced text notes."""

from __future__ import annotations

import re

from .builder import SECTIONS, EvidenceItem, Fact, Report, percent

__all__ = ["render_markdown", "md_escape"]

_SPECIAL = re.compile(r"([\\`*_\[\]<>|~])")  # the characters that make markup mid-line
_SIGN = {1: "+", -1: "\u2212"}


def md_escape(text: object) -> str:
    """Inline text safe for Markdown: one line, every markup character backslash-escaped (no raw HTML)."""
    s = " ".join(("" if text is None else str(text)).split())
    return _SPECIAL.sub(r"\\\1", s)


def _fence(text: str) -> str:
    """Text for a fenced block: no backticks that could close the fence."""
    return text.replace("`", "'")


def _h(anchor: str) -> str:
    return f"## {dict(SECTIONS)[anchor]}"


def _table(head: list[str], rows: list[list[str]]) -> list[str]:
    out = ["| " + " | ".join(head) + " |", "|" + "|".join("---" for _ in head) + "|"]
    out += ["| " + " | ".join(r) + " |" for r in rows]
    return out


def _facts(facts: tuple[Fact, ...] | list[Fact]) -> list[str]:
    return [f"- **{md_escape(f.label)}:** {md_escape(f.value)}" for f in facts]


def _bars(r: Report) -> list[str]:
    width = 40
    lines = ["```text", "probability of each listed candidate (0-100 %)"]
    for c in r.candidates:
        n = round(c.probability * width)
        bar = "#" * (n if n or c.probability < 0.005 else 1)
        name = c.name if len(c.name) <= 70 else c.name[:69] + "\u2026"
        lines.append(_fence(f"{c.rank:>2} {bar:<{width}} {percent(c.probability):>8}  {name}"))
    lines.append("```")
    return lines


def _evidence_lines(items: tuple[EvidenceItem, ...], name: str) -> list[str]:
    out = []
    for e in items:
        out.append(f"- **{md_escape(e.label)}**: {md_escape(e.state)} (log LR {e.log_lr:+.2f}; {md_escape(e.basis)})")
        if e.path:
            chain = [md_escape(name)]
            for s in e.path:
                src = f" \\[{md_escape(s.source)}\\]" if s.source else ""
                chain.append(f"({_SIGN.get(s.sign, '?')}) {md_escape(s.label)}{src}")
            out.append("  - path: " + " \u2192 ".join(chain))
    return out


def _genes_cover(n: int) -> str:
    return "This gene covers" if n == 1 else f"These {n} genes cover"


def render_markdown(r: Report) -> str:
    """The whole report as a Markdown string."""
    v = dict((f.label, f.value) for f in r.versions)
    L: list[str] = [f"# Tubule work-up report: {md_escape(r.case_id)}", "",
                    f"Prepared {md_escape(r.date)} · tubulo {md_escape(v.get('tubulo', ''))} · decision support, "
                    "not a diagnosis", ""]

    L += [_h("cautions"), ""]
    if r.critical:
        n = len(r.critical)
        L.append(f"> **\u26a0 CRITICAL VALUE{'S' if n > 1 else ''} ({n}): ACT NOW UNDER THE LOCAL PROTOCOL**")
        L.append(">")
        for c in r.critical:
            L.append(f"> - **\u26a0 CRITICAL: {md_escape(c.message)}** ({md_escape(c.source)})")
        L.append("")
    else:
        L += ["No value in this case is past a critical limit known to tubulo; the local laboratory's "
              "critical-value list still applies.", ""]
    for c in r.cautions:
        src = f" ({md_escape(c.source)})" if c.source else ""
        L.append(f"- **{c.level.upper()}** {md_escape(c.message)}{src}")
    L.append("")

    L += [_h("case"), ""] + _facts(r.case_facts) + [""]

    L += [_h("measurements"), ""]
    if r.measurements:
        rows = []
        for m in r.measurements:
            flag = m.flag
            if m.critical:
                flag = f"**\u26a0 CRITICAL** ({m.flag})" if m.flag else "**\u26a0 CRITICAL**"
            elif m.flag in ("LOW", "HIGH"):
                flag = f"**{m.flag}**"
            given = md_escape(m.given) + (f" ({md_escape(m.note)})" if m.note else "")
            ref = md_escape(m.reference) + (f" — {md_escape(m.reference_source)}" if m.reference_source else "")
            rows.append([f"{md_escape(m.label)} ({md_escape(m.key)})", given, md_escape(m.value), md_escape(m.unit),
                         ref, flag])
        L += _table(["Analyte", "As given", "Value", "Unit", "Reference", "Flag"], rows)
    else:
        L.append("No measurements in the case.")
    L.append("")

    L += [_h("derived"), ""]
    if r.derived:
        rows = []
        for d in r.derived:
            inputs = ", ".join(f"{i.label} {i.value}" for i in d.inputs) or "-"
            rows.append([f"{md_escape(d.label)} ({md_escape(d.id)})", f"{md_escape(d.value)} {md_escape(d.unit)}",
                         f"{md_escape(d.formula)}; inputs: {md_escape(inputs)}", md_escape(d.source),
                         "valid" if d.valid else f"not valid: {md_escape(d.reason)}"])
        L += _table(["Index", "Value", "Formula and inputs", "Source", "Use"], rows)
    else:
        L.append("No index could be computed from this case.")
    if r.not_computed:
        L += ["", f"Not computable from this case ({len(r.not_computed)}): "
              + md_escape("; ".join(f.label for f in r.not_computed)) + "."]
    L.append("")

    L += [_h("findings"), ""]
    if r.findings:
        L += _table(["Finding", "State", "HPO", "From"],
                    [[md_escape(f.label), md_escape(f.state), md_escape(f.code), md_escape(f.basis)] for f in r.findings])
    else:
        L.append("No findings.")
    L.append("")

    L += [_h("differential"), "",
          f"The {len(r.candidates)} most probable of {r.total_candidates} candidate explanations; the others hold "
          f"{percent(r.rest_probability)} together. Probabilities are relative to tubulo's list and assume one main "
          "cause.", ""]
    L += _bars(r) + [""]
    L += _table(["#", "Candidate", "Kind", "Genes", "Probability"],
                [[str(c.rank), f"{md_escape(c.name)} ({md_escape(c.id)}"
                  + (f"; {md_escape(', '.join(c.xrefs))}" if c.xrefs else "") + ")", md_escape(c.kind),
                  md_escape(", ".join(c.genes)) or "-", percent(c.probability)] for c in r.candidates])
    L.append("")

    L += [_h("evidence"), ""]
    if r.evidence:
        L += ["Weights are natural-log likelihood ratios. A causal path runs from the candidate to the finding; "
              "each step is marked (+) when it moves the same way as the step before it and (\u2212) when it "
              "moves the opposite way; the source of each link is in brackets.", ""]
        for c in r.evidence:
            L += [f"### {c.rank}. {md_escape(c.name)} — {percent(c.probability)} ({md_escape(c.kind)})", ""]
            if c.segments:
                L += [f"Segments: {md_escape('; '.join(c.segments))}", ""]
            if c.prior_notes:
                L += [f"Prior: {md_escape('; '.join(c.prior_notes))}", ""]
            L += ["**For**", ""] + (_evidence_lines(c.support, c.name) or ["- nothing"]) + [""]
            L += ["**Against**", ""] + (_evidence_lines(c.against, c.name) or ["- nothing"]) + [""]
            if c.unexplained:
                L += [f"**Not explained by this candidate:** {md_escape('; '.join(c.unexplained))}", ""]
    else:
        L += ["No candidate explained in detail.", ""]

    L += [_h("nephron"), ""]
    n = r.nephron
    labels = dict(n.part_labels)
    note = ["nephron drawing: in the HTML report only", "segments marked on it:"]
    note += [f"  {labels.get(p, p)}: candidate {', '.join(str(x) for x in ranks)}" for p, ranks in n.placement.parts] \
        or ["  (none)"]
    if n.outside:
        note += ["outside the kidney (not drawn):"] + [f"  {f.label}: {f.value}" for f in n.outside]
    if n.undrawn:
        note += ["renal sites without a piece in the drawing:"] + [f"  {f.label}: {f.value}" for f in n.undrawn]
    L += ["```text"] + [_fence(x) for x in note] + ["```", ""]
    L += _facts(n.legend) + [""]

    L += [_h("next-tests"), ""]
    if r.next_tests:
        L += ["Ordered by the expected information gain over the current differential (bits); the tier says how "
              "easy the test is to get.", ""]
        L += _table(["Test", "Tier", "Bits", "Helps separate"],
                    [[md_escape(t.test), md_escape(t.cost), f"{t.bits:.2f}", md_escape("; ".join(t.separates))]
                     for t in r.next_tests])
    else:
        L.append("No further test separates the leading candidates by a useful margin in tubulo's knowledge.")
    L.append("")

    L += [_h("panel"), ""]
    p = r.panel
    if p.cover:
        L += [f"Inherited causes hold {percent(p.inherited_mass)} of the probability. {_genes_cover(len(p.cover))} "
              f"{percent(p.covered)} of that inherited share (target {percent(p.target)}; {p.listed} genes carry any "
              "share).", ""]
        L += _table(["Gene (HGNC)", "Share of the inherited probability"],
                    [[md_escape(g), percent(m)] for g, m in p.cover])
    else:
        L.append("No inherited candidate with a known gene carries weight here; no panel suggested.")
    L.append("")

    L += [_h("about"), ""] + _facts(list(r.versions) + [Fact("Prepared", r.date)]) + ["", f"**{md_escape(r.standing)}**", ""]
    return "\n".join(L)
