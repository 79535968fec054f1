/**
 * The report's whole style sheet, inlined in its `<style>`: system fonts, no external
 * resources, readable on screen and in print.
 */
export const REPORT_CSS = `
:root { --ink: #1d262f; --muted: #5b6773; --rule: #d8dde3; --soft: #f4f6f8; --accent: #3f7d95; --warn: #b0582a; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fbfcfd; font: 14px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; }
header.page { background: #1d2b36; color: #f4f6f8; padding: 18px 32px 14px; }
header.page h1 { margin: 0 0 4px; font-size: 22px; font-weight: 650; }
header.page p { margin: 0; color: #c4ced8; }
nav.contents { padding: 8px 32px; background: #eef2f5; border-bottom: 1px solid var(--rule); font-size: 13px; }
nav.contents a { color: var(--accent); margin-right: 18px; text-decoration: none; }
main { padding: 8px 32px 48px; max-width: 1280px; }
section { margin-top: 28px; }
h2 { font-size: 18px; border-bottom: 2px solid var(--rule); padding-bottom: 4px; margin: 0 0 12px; }
h3 { font-size: 15px; margin: 18px 0 8px; }
p.lead { color: var(--muted); margin: 0 0 12px; max-width: 900px; }
table { border-collapse: collapse; font-variant-numeric: tabular-nums; }
th, td { padding: 3px 10px; border-bottom: 1px solid var(--rule); text-align: left; vertical-align: top; }
th { background: var(--soft); font-weight: 600; font-size: 12px; color: var(--muted); }
td.num, th.num { text-align: right; white-space: nowrap; }
table.facts th { background: none; text-align: left; color: var(--muted); font-weight: 500; width: 14em; }
tr.aliased td { color: var(--muted); font-style: italic; }
pre { background: #f1f4f7; border: 1px solid var(--rule); padding: 10px 12px; overflow-x: auto; font: 12px/1.45 ui-monospace, "SF Mono", Menlo, Consolas, monospace; max-height: 420px; }
details.segment { border: 1px solid var(--rule); background: #fff; margin: 8px 0; border-radius: 4px; }
details.segment > summary { cursor: pointer; padding: 7px 12px; background: var(--soft); font-weight: 600; }
details.segment > summary span.meta { font-weight: 400; color: var(--muted); margin-left: 10px; }
details.segment > div { padding: 8px 12px 12px; }
details#segment-index > summary { cursor: pointer; padding: 7px 12px; background: var(--soft); font-weight: 600; }
pre.segment-index { max-height: 70vh; margin: 0; }
pre.segment-index-head { margin: 0; border-bottom: 0; font-weight: 600; overflow: hidden; }
div.stat-groups { display: grid; grid-template-columns: repeat(auto-fit, minmax(210px, 1fr)); gap: 6px 18px; margin: 4px 0 10px; }
div.stat-group h4 { margin: 0 0 2px; font-size: 0.8em; font-weight: 600; text-transform: uppercase; letter-spacing: 0.04em; color: var(--muted); }
dl.stats { display: flex; flex-wrap: wrap; gap: 2px 16px; margin: 0; }
dl.stats div { display: flex; gap: 6px; }
dl.stats dt { color: var(--muted); }
dl.stats dd { margin: 0; font-variant-numeric: tabular-nums; }
.status { display: inline-block; padding: 0 7px; border-radius: 9px; font-size: 12px; font-weight: 600; background: #dfeee6; color: #24613f; }
.status.warn { background: #f7e4d6; color: #8a3f17; }
ul.notes { margin: 4px 0 8px; padding-left: 20px; color: #8a3f17; }
.charts { display: flex; flex-wrap: wrap; gap: 14px; }
figure.chart { margin: 0; padding: 8px; background: #fff; border: 1px solid var(--rule); border-radius: 4px; }
figure.chart svg { display: block; max-width: 100%; height: auto; }
/* The caption wraps to the chart's width instead of widening the figure. */
figure.chart figcaption { color: var(--muted); font-size: 12px; padding: 4px 4px 0; width: 0; min-width: 100%; }
.notice { border-left: 4px solid var(--warn); background: #fbf1ea; padding: 8px 12px; margin: 8px 0; max-width: 900px; }
ul.cautions li { margin-bottom: 8px; max-width: 900px; }
footer { color: var(--muted); font-size: 12px; padding: 16px 32px; border-top: 1px solid var(--rule); }
@media print { details.segment { break-inside: avoid; } nav.contents { display: none; } }
`;
