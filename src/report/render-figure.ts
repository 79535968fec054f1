import type { TopLevelSpec } from 'vega-lite';
import { escapeHtml } from './escape-html.js';
import { renderChartSvg } from './render-chart-svg.js';

/** A chart as an inline-SVG `<figure>`, with an optional caption (plain text). */
export async function renderFigure(spec: TopLevelSpec, label: string, caption?: string, id?: string): Promise<string> {
  const svg = await renderChartSvg(spec, label);
  const cap = caption === undefined || caption === '' ? '' : `<figcaption>${escapeHtml(caption)}</figcaption>`;
  return `<figure class="chart"${id === undefined ? '' : ` id="${escapeHtml(id)}"`}>${svg}${cap}</figure>`;
}
