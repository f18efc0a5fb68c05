"""The report's stylesheet, inlined in the page (no external fonts or files)."""

CSS = """
:root { --ink:#1b1b1f; --muted:#5b5b66; --rule:#d8d8de; --bg:#ffffff; --panel:#f6f6f8;
  --warn-bg:#fff4d6; --warn-edge:#a86a00; --ok-bg:#e8f4ee; --ok-edge:#2f6b4f; --accent:#1f3b73; }
* { box-sizing: border-box; }
html { font-size: 15px; }
body { margin: 0; color: var(--ink); background: var(--bg);
  font-family: system-ui, -apple-system, "Segoe UI", Roboto, "DejaVu Sans", Arial, sans-serif;
  line-height: 1.45; }
header.top, main, footer { max-width: 1180px; margin: 0 auto; padding: 0 24px; }
header.top { padding-top: 18px; }
h1 { font-size: 1.6rem; margin: 0.2em 0; }
h2 { font-size: 1.25rem; margin: 0 0 0.4em; border-bottom: 2px solid var(--rule); padding-bottom: 4px; }
h3 { font-size: 1.02rem; margin: 1.1em 0 0.4em; }
section { margin: 26px 0; }
.meta { color: var(--muted); margin: 0; font-size: 0.92rem; }
.muted { color: var(--muted); }
.lead { margin-top: 0; color: #33333b; max-width: 60rem; }
code { font-family: ui-monospace, "DejaVu Sans Mono", Menlo, monospace; font-size: 0.9em;
  overflow-wrap: anywhere; }
.caution { display: flex; gap: 12px; align-items: flex-start; background: var(--warn-bg);
  border: 1px solid var(--warn-edge); border-left: 8px solid var(--warn-edge); padding: 10px 14px;
  margin: 14px 0 8px; border-radius: 4px; }
.caution .sign { font-size: 1.5rem; line-height: 1; }
.caution p { margin: 0; }
nav.toc { margin: 10px 0 0; font-size: 0.92rem; }
nav.toc a { color: var(--accent); margin-right: 14px; white-space: nowrap; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 4px 18px; margin: 0.6em 0; }
dl.facts dt { font-weight: 600; color: #2d2d35; }
dl.facts dd { margin: 0; }
ul.plain { margin: 0; padding-left: 1.1em; }
.tiles { display: flex; gap: 12px; flex-wrap: wrap; margin: 6px 0 10px; }
.tile { border: 1px solid var(--rule); border-radius: 6px; padding: 8px 16px; min-width: 9rem;
  background: var(--panel); }
.tile .n { display: block; font-size: 1.7rem; font-weight: 700; }
.tile .k { color: var(--muted); }
.tile-positive { border-top: 5px solid #22123f; }
.tile-inconclusive { border-top: 5px dashed #2f7ea6; }
.tile-negative { border-top: 5px solid #cfe8a4; }
.warn { background: var(--warn-bg); border-left: 6px solid var(--warn-edge); padding: 6px 12px; }
.ok { background: var(--ok-bg); border-left: 6px solid var(--ok-edge); padding: 6px 12px; }
table { border-collapse: collapse; }
table.data { font-size: 0.9rem; margin: 4px 0; }
table.data th, table.data td { border-bottom: 1px solid var(--rule); padding: 3px 9px;
  text-align: left; vertical-align: top; }
table.data thead th { position: sticky; top: 0; background: #ececf1; z-index: 1;
  white-space: nowrap; }
table.data td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
table.data td.prob { font-weight: 600; }
table.kv th { text-align: left; font-weight: 600; padding: 2px 14px 2px 0; vertical-align: top; }
table.kv td { padding: 2px 0; }
table.kv.nested { font-size: 0.95em; }
th button.sort { font: inherit; font-weight: 600; background: none; border: 0; padding: 0;
  cursor: pointer; color: inherit; }
th button.sort::after { content: " \\2195"; color: #8a8a95; }
th[aria-sort="ascending"] button.sort::after { content: " \\2191"; color: var(--ink); }
th[aria-sort="descending"] button.sort::after { content: " \\2193"; color: var(--ink); }
.scroll { overflow-x: auto; }
.scroll.tall { max-height: 34rem; overflow-y: auto; border: 1px solid var(--rule); }
.id { font-family: ui-monospace, "DejaVu Sans Mono", Menlo, monospace; font-size: 0.92em;
  overflow-wrap: anywhere; }
table.data th .id { white-space: nowrap; }
.call { font-weight: 600; }
.call-positive .call, span.call-positive { text-decoration: underline; text-decoration-thickness: 2px; }
span.call-inconclusive { font-style: italic; }
.chip { display: inline-block; padding: 0 5px; border-radius: 3px; border: 1px solid #888;
  font-size: 0.85em; font-variant-numeric: tabular-nums; }
.controls { display: flex; gap: 14px; align-items: center; flex-wrap: wrap; margin: 6px 0 8px; }
.controls input, .controls select, .controls button { font: inherit; padding: 2px 6px; }
#calls-status { color: var(--muted); }
.legend { margin: 4px 0 12px; }
.legend svg { max-width: 100%; height: auto; }
.legend-words { margin: 2px 0; font-size: 0.9rem; color: #33333b; max-width: 62rem; }
.mark { font-weight: 700; border: 1px solid #777; padding: 0 4px; border-radius: 3px; }
svg .axis { font-size: 11px; fill: #333; font-family: inherit; }
svg .thr { fill: #7a3b00; }
svg line.threshold { stroke: #7a3b00; stroke-width: 1.5; stroke-dasharray: 4 3; }
svg.ranked { font-family: inherit; max-width: 100%; height: auto; }
svg.ranked .id { font-size: 12px; fill: #1b1b1f; font-family: ui-monospace, "DejaVu Sans Mono", monospace; }
svg.ranked .val { font-size: 11.5px; fill: #1b1b1f; }
svg.ranked .track { fill: #f2f2f4; }
.figure { margin: 8px 0; }
.figure svg { max-width: 100%; height: auto; }
.figure svg * { stroke-linejoin: round; stroke-linecap: butt; }
.figure figcaption { font-size: 0.88rem; color: var(--muted); max-width: 60rem; }
.plates { display: flex; flex-wrap: wrap; gap: 22px; }
table.plate { border-collapse: separate; border-spacing: 2px; font-variant-numeric: tabular-nums; }
table.plate caption { text-align: left; font-weight: 600; padding-bottom: 3px; }
table.plate th { font-size: 0.78rem; color: var(--muted); font-weight: 600; padding: 0 2px; }
table.plate td.well { width: 46px; height: 34px; text-align: center; border: 1px solid #777;
  border-radius: 4px; font-size: 0.74rem; line-height: 1.05; padding: 1px; position: relative; }
table.plate.p384 td.well { width: 38px; height: 26px; font-size: 0.64rem; border-radius: 3px; }
table.plate td.well .wm { display: block; font-weight: 800; font-size: 0.95rem; }
table.plate.p384 td.well .wm { display: inline; font-size: 0.8rem; margin-left: 1px; }
table.plate td.well.call-positive { border: 2px solid #000; }
table.plate td.well.call-inconclusive { border: 2px dashed #000; }
table.plate td.empty { background: repeating-linear-gradient(45deg, #fff, #fff 4px, #e4e4e8 4px,
  #e4e4e8 8px); border-color: #c8c8d0; }
.unplaced { font-size: 0.9rem; }
details > summary { cursor: pointer; color: var(--accent); margin: 6px 0; }
footer { border-top: 1px solid var(--rule); margin-top: 30px; padding-top: 10px; padding-bottom: 30px;
  font-size: 0.88rem; color: var(--muted); }
section.review .fields { display: flex; flex-wrap: wrap; gap: 1rem 2rem; margin-top: 0.8rem; }
section.review .field { display: flex; align-items: flex-end; gap: 0.5rem; flex: 1 1 16rem; }
section.review .line { flex: 1; border-bottom: 1px solid #000; min-height: 1.6rem; }
table.inputs td:last-child { font-family: monospace; font-size: 0.8rem; word-break: break-all; }
details.why { margin: 0.2rem 0; }
details.why > summary { cursor: pointer; }
details.why[open] { border-left: 3px solid #555; padding-left: 0.5rem; }
details.technical > summary, details.fit > summary { cursor: pointer; font-weight: 600; }
td.well a.why-link { color: inherit; text-decoration: none; display: block; }
@media print {
  html { font-size: 11px; }
  nav.toc, .controls, noscript { display: none !important; }
  a { color: inherit; text-decoration: none; }
  details.why:not([open]) { display: none; }
  section.review { break-inside: avoid; break-before: auto; margin-top: 2rem; }
  section.review .line { min-height: 2.2rem; }
  footer { break-inside: avoid; }
  .scroll.tall { max-height: none; overflow: visible; border: 0; }
  table.data thead th { position: static; }
  tr, .plate, figure, .caution { break-inside: avoid; }
  * { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
"""
