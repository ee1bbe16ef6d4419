"""One self-contained HTML page: header facts, findings by grade with why and remedy, and SVG plots.

The page loads nothing: no script, no external style, font or image; a
content security policy forbids all of them. Every text that comes from the
data or the run (paths, column names, labels, messages) goes through
:func:`esc`. matplotlib is imported only when plots are drawn.
"""

from __future__ import annotations

import html
from typing import TYPE_CHECKING, Any

from ..findings import GRADE_MEANINGS, GRADES_STRONGEST_FIRST, Finding, Grade, count_by_grade, counted
from ..rule import capped_names, default_grades, fmt
from ..text import inert_message
from .base import ReportWriter, RunFacts, fix_first, folded, groups_sentence, labels_not_unique, row_groups

if TYPE_CHECKING:
    from ..outcome import Report
    from ..rule import RuleLike
    from .plots import Plot

CONTENT_POLICY = "default-src 'none'; style-src 'unsafe-inline'; img-src data:"
LISTED_ROWS = 20

STYLE = """
.prefit-report{font-family:system-ui,-apple-system,"Segoe UI",sans-serif;color:#1d2a33;line-height:1.45;max-width:72rem;margin:0 auto;padding:1rem}
.prefit-report h1{font-size:1.5rem;margin:.2rem 0}
.prefit-report h2{font-size:1.2rem;margin:1.6rem 0 .5rem;border-bottom:1px solid #d6dee4;padding-bottom:.2rem}
.prefit-report h3{font-size:1rem;margin:1rem 0 .3rem}
.prefit-report .path{font-family:ui-monospace,monospace;word-break:break-all}
.prefit-report .verdict{display:inline-block;padding:.25rem .7rem;border-radius:.3rem;font-weight:600}
.prefit-report .verdict.ready{background:#dcefdc;color:#1e5a1e}
.prefit-report .verdict.not-ready{background:#f6d9d6;color:#7a1a12}
.prefit-report .verdict.incomplete{background:#fbe7c6;color:#6b4300}
.prefit-report dl.facts{display:grid;grid-template-columns:max-content 1fr;gap:.15rem 1rem;margin:.6rem 0}
.prefit-report dl.facts dt{color:#5b7083}
.prefit-report dl.facts dd{margin:0;font-weight:600}
.prefit-report table{border-collapse:collapse;margin:.4rem 0}
.prefit-report th,.prefit-report td{border:1px solid #d6dee4;padding:.2rem .5rem;text-align:left;vertical-align:top}
.prefit-report td.n{text-align:right;font-variant-numeric:tabular-nums}
.prefit-report .finding{border-left:.35rem solid #5b7083;background:#f7f9fa;padding:.5rem .8rem;margin:.6rem 0}
.prefit-report details.finding>summary{cursor:pointer}
.prefit-report nav.toc ul{list-style:none;padding:0;margin:.6rem 0;display:flex;flex-wrap:wrap;gap:.3rem 1.2rem}
.prefit-report nav.toc .count{display:inline-block;min-width:1.4rem;text-align:center;background:#e8eef3;border-radius:.6rem;font-size:.8rem}
.prefit-report a.rule{color:inherit}
.prefit-report .grade-blocks{border-color:#7a1a12}
.prefit-report .grade-misleads{border-color:#c0392b}
.prefit-report .grade-weakens{border-color:#c77700}
.prefit-report .grade-note{border-color:#3d6e99}
.prefit-report .tag{display:inline-block;font-size:.75rem;font-weight:700;text-transform:uppercase;padding:0 .4rem;border-radius:.2rem;color:#fff;background:#5b7083}
.prefit-report .tag.grade-blocks{background:#7a1a12}.prefit-report .tag.grade-misleads{background:#c0392b}
.prefit-report .tag.grade-weakens{background:#c77700}.prefit-report .tag.grade-note{background:#3d6e99}
.prefit-report .rule{font-family:ui-monospace,monospace;font-weight:600}
.prefit-report .columns{font-style:italic}
.prefit-report .label{color:#5b7083}
.prefit-report .remedy{color:#1e5a1e}
.prefit-report .explained{margin-left:1.5rem}
.prefit-report ol.fix-first li{margin:.2rem 0}
.prefit-report figure{margin:1rem 0}
.prefit-report figure svg.plot{max-width:100%;height:auto}
.prefit-report figcaption{color:#5b7083;font-size:.9rem}
"""


def esc(text: Any) -> str:
    """Text as HTML character data or attribute value: made inert (:func:`prefit.text.inert_message`), then ``& < > " '`` as references."""
    return html.escape(inert_message(str(text)), quote=True)


def _verdict(report: "Report") -> tuple[str, str]:
    if report.failed_rules:
        return "incomplete", f"incomplete: {counted(len(report.failed_rules), 'rule')} failed ({', '.join(report.failed_rules)})"
    if report.gated:
        return "not-ready", f"not ready at gate {report.gate.word}: {counted(len(report.gated), 'finding')} at or above it"
    return "ready", f"ready at gate {report.gate.word}"


def _label_source(report: "Report") -> str:
    """The id column, and whether its labels name single rows."""
    name = report.design.id
    if not name:
        return "data row numbers"
    shared = labels_not_unique(report)
    return name if shared is None else f"{name} ({shared})"


def _facts(report: "Report") -> str:
    pairs = [
        ("table", report.info.path),
        ("format", report.info.format),
        ("rows", f"{report.info.rows:,}"),
        ("columns", f"{report.info.columns:,}"),
        ("target", report.target),
        ("row labels", _label_source(report)),
        ("groups", groups_sentence(report) or "none (rows treated as independent)"),
        ("parameters", f"{report.parameters:,}"),
        ("complete cases", f"{report.complete_cases:,}"),
        ("gate", report.gate.word),
        ("purpose", report.purpose),
        ("accepted findings", f"{len(report.accepted):,} (counted, not listed)"),
    ]
    if report.info.sha256:
        pairs.append(("sha256", report.info.sha256))
    if report.baseline is not None:
        pairs.append(("baseline", str(report.baseline["path"])))
        pairs.append(("baseline sha256", str(report.baseline["sha256"])))
    body = "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in pairs)
    return f'<dl class="facts">{body}</dl>'


def _design(report: "Report", prefix: str = "") -> str:
    design = report.design
    rows = []
    for term in design.terms:
        extra = f"reference {term.reference}" if term.reference is not None else ""
        rows.append(f"<tr><td>{esc(term.column)}</td><td>{esc(term.kind)}</td><td class=\"n\">{int(term.parameters)}</td><td>{esc(extra)}</td></tr>")
    left_out = "".join(f"<li><b>{esc(c)}</b>: {esc(why)}</li>" for c, why in design.left_out.items())
    return (
        f'<h2 id="{prefix}design">Design</h2>'
        f"<p>{'with' if design.intercept else 'without'} intercept; {esc(design.coding)}; "
        f"{counted(int(design.rows_dropped), 'row')} dropped as incomplete.</p>"
        "<table><thead><tr><th>term</th><th>kind</th><th>parameters</th><th>coding</th></tr></thead>"
        f"<tbody>{''.join(rows)}</tbody></table>"
        + (f"<p class=\"label\">Left out of the predictors:</p><ul>{left_out}</ul>" if left_out else "")
    )


def _counts(report: "Report", findings: list[Finding]) -> str:
    counts = count_by_grade(findings)
    head = "".join(f"<th>{esc(w)}</th>" for w in counts) + "<th>accepted</th>"
    body = "".join(f'<td class="n">{n}</td>' for n in counts.values()) + f'<td class="n">{len(report.accepted)}</td>'
    return f'<table class="counts"><thead><tr>{head}</tr></thead><tbody><tr>{body}</tr></tbody></table>'


def rule_anchor(rule_id: str, prefix: str = "") -> str:
    """The id of a rule's catalogue entry, on the catalogue page or in a report's appendix (``prefix`` per table)."""
    return prefix + "rule-" + rule_id.replace(".", "-")


def rule_entry(rule: "RuleLike", anchor: str) -> str:
    """One rule's catalogue entry: summary, grades, why, thresholds with their sources, remedy.

    The same entry makes up the catalogue page (``prefit rules --format html``) and a report's appendix of the
    rules its findings came from, so a report stays one self-contained page.
    """
    limits = "".join(f"<tr><td>{esc(t.name)}</td><td>{esc(t.describe())}</td><td>{esc(t.source)}</td></tr>" for t in rule.thresholds)
    table = f"<table><thead><tr><th>threshold</th><th>rule</th><th>source</th></tr></thead><tbody>{limits}</tbody></table>" if limits else ""
    grades = ", ".join(g.word for g in default_grades(rule)) or "-"
    return (
        f'<article class="finding rule-entry" id="{anchor}"><h3 class="rule">{esc(rule.id)}</h3>'
        f'<p>{esc(rule.summary)}</p><p><span class="label">grades:</span> {esc(grades)}</p>'
        f'<p><span class="label">what it does to a fit:</span> {esc(rule.why)}</p>{table}'
        f'<p class="remedy"><span class="label">remedy:</span> {esc(rule.remedy)}</p></article>'
    )


def _finding(finding: Finding, why: str, prefix: str) -> str:
    opened = " open" if finding.grade > Grade.NOTE else ""
    parts = [f'<details class="finding grade-{finding.grade.word}"{opened}>']
    columns = f' <span class="columns">{esc(capped_names(finding.columns))}</span>' if finding.columns else ""
    link = f'<a class="rule" href="#{rule_anchor(finding.rule, prefix)}" title="the rule in the catalogue below">{esc(finding.rule)}</a>'
    parts.append(f'<summary><span class="tag grade-{finding.grade.word}">{esc(finding.grade.word)}</span> {link}{columns}</summary>')
    parts.append(f"<p>{esc(finding.message)}</p>")
    if finding.rows:
        items, more = row_groups(finding, LISTED_ROWS)
        shown = ", ".join(items)
        tail = f" and {counted(more, 'more row')}" if more > 0 else ""
        parts.append(f'<p><span class="label">rows:</span> {esc(shown + tail)}</p>')
    if finding.value is not None or finding.threshold is not None:
        measured = fmt(finding.value) if finding.value is not None else "-"
        limit = fmt(finding.threshold) if finding.threshold is not None else "-"
        parts.append(f'<p><span class="label">measured</span> {esc(measured)} <span class="label">threshold</span> {esc(limit)} <span class="label">source</span> {esc(finding.source or "-")}</p>')
    if why:
        parts.append(f'<p><span class="label">why it matters:</span> {esc(why)}</p>')
    if finding.remedy:
        parts.append(f'<p class="remedy"><span class="label">remedy:</span> {esc(finding.remedy)}</p>')
    parts.append("</details>")
    return "".join(parts)


def _contents(findings: list[Finding], prefix: str, plots: list["Plot"]) -> str:
    """The table of contents: findings by grade with their counts, the design, each plot."""
    counts = count_by_grade(findings)
    items = [
        f'<li><a href="#{prefix}grade-{word}">{esc(word)}</a> <span class="count">{n}</span></li>' for word, n in counts.items() if n
    ]
    if not findings:
        items.append(f'<li><a href="#{prefix}findings">findings</a> <span class="count">0</span></li>')
    items.append(f'<li><a href="#{prefix}design">design</a></li>')
    if findings:
        items.append(f'<li><a href="#{prefix}rules">rules</a></li>')
    items += [f'<li><a href="#{plot.key}">{esc(plot.title)}</a></li>' for plot in plots]
    return f'<nav class="toc" aria-label="contents"><ul>{"".join(items)}</ul></nav>'


def table_section(report: "Report", findings: list[Finding], run: RunFacts, plots: bool, prefix: str = "t1-") -> str:
    """The part of the page about one table."""
    kind, verdict = _verdict(report)
    out = ['<section class="table-report">']
    out.append(f'<h1>prefit report <span class="path">{esc(report.info.path)}</span></h1>')
    out.append(f'<p><span class="verdict {kind}">{esc(verdict)}</span></p>')
    out.append(_facts(report))
    sampled = report.engine.sentence() if report.engine is not None else None
    if sampled is not None:
        out.append(f"<p>{esc(sampled)}</p>")
    drawn: list[Plot] = []
    if plots:
        from .plots import draw_all

        drawn = draw_all(report, prefix)
    out.append(_contents(findings, prefix, drawn))
    first = fix_first(report)
    if first:
        items = "".join(
            f'<li><span class="tag grade-{root.grade.word}">{esc(root.grade.word)}</span> <span class="rule">{esc(root.rule)}</span>'
            + (f' <span class="columns">{esc(capped_names(root.columns))}</span>' if root.columns else "")
            + (f' <span class="label">explains {explained} finding{"" if explained == 1 else "s"}</span>' if explained else "")
            + "</li>"
            for root, explained in ((r.shown(), n) for r, n in first)
        )
        out.append(f'<h2 id="{prefix}fix-first">Fix first</h2><ol class="fix-first">{items}</ol>')
    out.append(f'<h2 id="{prefix}findings">Findings</h2>')
    out.append(_counts(report, findings))
    if not findings:
        out.append("<p>No findings.</p>")
    shown = {f.key for f in findings}
    roots = [(root, effects) for root, effects in folded(report) if root.key in shown]
    for grade in GRADES_STRONGEST_FIRST:
        group = [(root, effects) for root, effects in roots if root.grade is grade]
        if group:
            out.append(f'<h3 id="{prefix}grade-{grade.word}"><span class="tag grade-{grade.word}">{esc(grade.word)}</span> {len(group)}: {esc(GRADE_MEANINGS[grade])}</h3>')
            for root, effects in group:
                out.append(_finding(root, run.why(root.rule), prefix))
                if effects:
                    out.append('<div class="explained"><p class="label">explained by the finding above (gone once it is fixed):</p>')
                    out.extend(_finding(f, run.why(f.rule), prefix) for f in effects)
                    out.append("</div>")
    out.append(_design(report, prefix))
    if drawn:
        out.append("<h2>Plots</h2>")
    for plot in drawn:
        title_id = f"{plot.key}-title"
        svg = plot.svg.replace(">", f'><title id="{title_id}">{esc(plot.title)}</title>', 1)
        out.append(f'<figure class="plot" id="{plot.key}"><h3>{esc(plot.title)}</h3>{svg}<figcaption>{esc(plot.caption)}</figcaption></figure>')
    cited = [run.rules[rule_id] for rule_id in sorted({f.rule for f in findings}) if rule_id in run.rules]
    if cited:
        out.append(f'<h2 id="{prefix}rules">Rules behind these findings</h2>')
        out.extend(rule_entry(rule, rule_anchor(rule.id, prefix)) for rule in cited)
    out.append(f'<p class="label">{counted(len(report.outcomes), "rule")} ran; prefit {esc(run.version)}.</p>')
    out.append("</section>")
    return "".join(out)


class HtmlWriter(ReportWriter):
    """A complete HTML document, one section per table."""

    def begin_run(self, run: RunFacts) -> None:
        super().begin_run(run)
        self.sections: list[str] = []
        self.paths: list[str] = []

    def begin_table(self, report: "Report") -> None:
        self.findings: list[Finding] = []

    def finding(self, finding: Finding) -> None:
        self.findings.append(finding)

    def end_table(self, report: "Report") -> None:
        self.paths.append(report.info.path)
        self.sections.append(table_section(report, self.findings, self.run, self.settings.plots, f"t{len(self.paths)}-"))

    def end_run(self) -> str:
        title = "prefit report: " + ", ".join(self.paths)
        return (
            "<!DOCTYPE html>\n"
            '<html lang="en"><head><meta charset="utf-8">'
            f'<meta http-equiv="Content-Security-Policy" content="{CONTENT_POLICY}">'
            '<meta name="viewport" content="width=device-width, initial-scale=1">'
            f"<title>{esc(title)}</title><style>{STYLE}</style></head>\n"
            f'<body><main class="prefit-report">{"".join(self.sections)}</main></body></html>\n'
        )


def html_fragment(report: "Report") -> str:
    """The report as an HTML fragment for a notebook cell (styles scoped to the report)."""
    section = table_section(report, list(report.findings), RunFacts.of([report]), plots=True)
    return f'<div class="prefit-report"><style>{STYLE}</style>{section}</div>'
