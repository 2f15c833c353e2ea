"""The inline style sheet of the HTML proof page: system fonts only, light, one column under
900 px, the check table's rows as stacked cards under 640 px (phones: nothing runs past the
screen's right edge), and an A4 print layout (a page break before each section, no dark
backgrounds, images at most the page width)."""
from __future__ import annotations

from compose.color.interface import css_variables
from compose.output.svg import PLOT_W

__all__ = ["CSS", "BODY_PX"]

#: the body text's size (CSS px); the legend is shown with its labels at this size
BODY_PX = 15

# every colour is a variable from compose.color.interface (our own LCh choices)
CSS = ":root { color-scheme: light; " + css_variables() + " }\n" + """
* { box-sizing: border-box; }
html { background: var(--surround); }
body { margin: 0; color: var(--ink); background: var(--paper);
  font: """ + str(BODY_PX) + """px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, "DejaVu Sans", "Liberation Sans",
  Arial, sans-serif; max-width: 1400px; margin-inline: auto; padding: 0 28px 40px; }
header { padding: 22px 0 10px; border-bottom: 1px solid var(--rule); }
h1 { font-size: 1.7rem; margin: 0 0 2px; letter-spacing: -0.01em; }
h2 { font-size: 1.25rem; margin: 0 0 10px; padding-top: 8px; }
h3 { font-size: 1rem; margin: 0 0 6px; }
.sub, .note, figcaption, .muted { color: var(--muted); }
.sub { margin: 0 0 12px; font-size: 0.92rem; }
.caution { border: 2px solid var(--caution-edge); background: var(--caution-bg); padding: 8px 12px; margin: 10px 0;
  font-weight: 600; border-radius: 4px; color: var(--ink); }
.caution::before { content: "\\26A0\\FE0E  "; }
.verdict { display: flex; flex-wrap: wrap; gap: 6px 18px; align-items: baseline; padding: 10px 14px;
  border-radius: 4px; margin: 10px 0 4px; border: 1px solid; }
.verdict strong { font-size: 1.35rem; }
.verdict.fail { background: var(--fail-bg); border-color: var(--fail-edge); color: var(--fail); }
.verdict.pass { background: var(--pass-bg); border-color: var(--pass-edge); color: var(--pass); }
.verdict.none { background: var(--panel); border-color: var(--rule); color: var(--muted); }
.verdict ul { margin: 0; padding-left: 1.1em; color: var(--ink); font-size: 0.92rem; }
nav { position: sticky; top: 0; z-index: 2; background: var(--paper);
  border-bottom: 1px solid var(--rule); padding: 6px 0; margin-bottom: 8px; font-size: 0.92rem; }
nav a { color: var(--accent); text-decoration: none; margin-right: 16px; white-space: nowrap; }
nav a:hover { text-decoration: underline; }
section { padding: 14px 0 22px; border-bottom: 1px solid var(--rule); }
figure { margin: 0; }
figcaption { font-size: 0.85rem; margin-top: 4px; }
img { display: block; max-width: 100%; height: auto; }
img.map { width: 100%; border: 1px solid var(--rule); }
.frame { border: 1px solid var(--rule); }
.map-grid { display: grid; gap: 20px; align-items: start;
  grid-template-columns: minmax(0, 1fr) minmax(240px, min(var(--legend, 360px), 40%)); }
.legend img { width: 100%; }
.proofs { display: grid; grid-template-columns: minmax(0, 2fr) minmax(0, 1fr) minmax(0, 1fr);
  gap: 12px 14px; align-items: start; }
.proofs figure:first-child { grid-row: span 2; }
.proofs figure img { width: 100%; border: 1px solid var(--rule); }
.layer { border: 1px solid var(--rule); border-radius: 4px; padding: 12px 14px; margin: 0 0 14px; }
.layer header { border: 0; padding: 0 0 6px; display: flex; flex-wrap: wrap; gap: 4px 14px;
  align-items: baseline; }
.layer header h3 { margin: 0; font-size: 1.05rem; }
.tag { font-size: 0.78rem; padding: 1px 7px; border-radius: 9px; background: var(--accent-bg);
  color: var(--accent); border: 1px solid var(--accent-edge); }
.tag.pass { color: var(--pass); } .tag.fail { color: var(--fail); }
.cells { display: grid; gap: 12px;
  grid-template-columns: minmax(0, 1fr) minmax(0, 1fr) minmax(min(100%, """ + str(PLOT_W) + """px), 1fr); }
.cells img { width: 100%; }
.cells .plot { grid-column: 3; }
.numbers { font-size: 0.86rem; margin: 8px 0 0; font-variant-numeric: tabular-nums; }
.numbers span { margin-right: 14px; white-space: nowrap; }
table { border-collapse: collapse; width: 100%; font-size: 0.86rem; }
th, td { text-align: left; vertical-align: top; padding: 5px 8px; border-bottom: 1px solid var(--rule); }
thead th { border-bottom: 2px solid var(--frame); font-weight: 600; background: var(--panel); }
td.num { font-variant-numeric: tabular-nums; white-space: nowrap; }
td.rule code { font-weight: 600; }
td .msg { color: var(--muted); font-size: 0.8rem; margin-top: 2px; }
td.fix { max-width: 34em; }
.v { display: inline-block; min-width: 3.6em; text-align: center; font-weight: 700;
  border-radius: 3px; padding: 0 5px; font-size: 0.8rem; }
li.fail .v, tr.fail .v { background: var(--fail-bg); color: var(--fail); border: 1px solid var(--fail-edge); }
li.warn .v, tr.warn .v { background: var(--warn-bg); color: var(--warn); border: 1px solid var(--warn-edge); }
li.pass .v, tr.pass .v { background: var(--pass-bg); color: var(--pass); border: 1px solid var(--pass-edge); }
tr.fail td { background: var(--fail-row); }
.ramps { display: grid; grid-template-columns: repeat(auto-fill, minmax(540px, 1fr)); gap: 18px; }
ul.proof-rules { list-style: none; padding: 0; font-size: 0.86rem; }
ul.proof-rules li { margin: 2px 0; }
.ramps img { width: 100%; border: 1px solid var(--rule); }
pre { background: var(--panel); border: 1px solid var(--rule); padding: 12px; overflow-x: auto;
  font: 0.82rem/1.4 ui-monospace, "DejaVu Sans Mono", "Liberation Mono", Menlo, Consolas, monospace;
  white-space: pre-wrap; word-break: break-word; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 2px 14px; font-size: 0.88rem;
  margin: 8px 0 0; }
dl.facts dt { color: var(--muted); }
dl.facts dd { margin: 0; }
footer { padding: 16px 0; font-size: 0.85rem; color: var(--muted); }
@media screen and (max-width: 900px) {
  body { padding: 0 12px 30px; }
  .map-grid, .cells { grid-template-columns: 1fr; }
  .cells .plot { grid-column: auto; }
  .legend { max-width: var(--legend, 360px); }
  .ramps { grid-template-columns: 1fr; }
  .proofs { grid-template-columns: 1fr 1fr; }
  .proofs figure:first-child { grid-row: auto; grid-column: span 2; }
  td .msg { display: none; }
}
@media screen and (max-width: 640px) {
  #check-results thead { display: none; }
  #check-results, #check-results tbody { display: block; width: 100%; }
  #check-results tr { display: grid; grid-template-columns: minmax(0, 1fr) auto; column-gap: 10px;
    padding: 6px 0; border-bottom: 1px solid var(--rule); }
  #check-results td { grid-column: 1; border: 0; padding: 1px 0; overflow-wrap: anywhere; }
  #check-results td.verdict-cell { grid-column: 2; grid-row: 1; }
  #check-results td.num::before { content: attr(data-label) " "; color: var(--muted); }
  #check-results td.fix { max-width: none; }
  #check-results tr.pass td.fix { display: none; }
  dl.facts dd { overflow-wrap: anywhere; }
}
@media print {
  @page { size: A4; margin: 12mm; }
  html, body { background: var(--paper); }
  body { max-width: none; padding: 0; font-size: 9.5pt; }
  nav { display: none; }
  section { border: 0; padding: 0; break-before: page; }
  section#map { break-before: auto; }
  h2 { break-after: avoid; }
  figure, .layer, tr, .verdict, .caution { break-inside: avoid; }
  img { max-width: 100% !important; }
  .map-grid { grid-template-columns: minmax(0, 1fr) 62mm; }
  .proofs { grid-template-columns: repeat(3, minmax(0, 1fr)); }
  .proofs figure:first-child { grid-row: auto; grid-column: span 2; }
  .cells { grid-template-columns: repeat(3, 1fr); }
  .ramps { grid-template-columns: 1fr; }
  .ramps img { max-height: 230mm; width: auto; }
  tr.fail td { background: none; }
  * { print-color-adjust: exact; -webkit-print-color-adjust: exact; }
  a { color: inherit; text-decoration: none; }
  pre { white-space: pre-wrap; background: none; }
}
"""
