import { View, parse } from 'vega';
import { compile } from 'vega-lite';
import type { Config, TopLevelSpec } from 'vega-lite';

/** The look every report chart shares: system fonts only, quiet axes, our own colours. */
export const CHART_CONFIG: Config = {
  font: 'system-ui, -apple-system, "Segoe UI", Roboto, sans-serif',
  background: '#ffffff',
  view: { stroke: '#d8dde3' },
  axis: { labelColor: '#38424c', titleColor: '#38424c', gridColor: '#edf0f3', domainColor: '#9aa5b1', tickColor: '#9aa5b1', labelFontSize: 11, titleFontSize: 11, titleFontWeight: 600 },
  title: { anchor: 'start', fontSize: 13, fontWeight: 600, color: '#1d262f', subtitleColor: '#5b6773', subtitleFontSize: 11 },
  legend: { labelFontSize: 11, titleFontSize: 11 },
};

/**
 * Renders a vega-lite spec to an SVG string in Node, without a browser or canvas:
 * vega-lite compiles it to a vega spec, and a headless vega View draws the scene graph as
 * SVG. Text widths are estimated, so labels are laid out without measuring fonts.
 *
 * The returned markup is meant to be inlined in HTML: the XML namespace declarations, which
 * an HTML parser does not need, are removed, so the page carries no URL at all.
 */
export async function renderChartSvg(spec: TopLevelSpec, label: string, warnings?: string[]): Promise<string> {
  // vega-lite and vega print their warnings on the console by default, in the middle of a
  // command's output; they go to `warnings` instead (the tests ask every chart for none).
  const logger = collectingLogger(warnings);
  const vegaSpec = compile(spec, { config: CHART_CONFIG, logger }).spec;
  const view = new View(parse(vegaSpec), { renderer: 'none', logger });
  try {
    const svg = await view.toSVG();
    return svg
      .replace(' xmlns="http://www.w3.org/2000/svg"', '')
      .replace(' xmlns:xlink="http://www.w3.org/1999/xlink"', '')
      .replace('<svg ', `<svg role="img" aria-label="${label.replaceAll('&', '&amp;').replaceAll('"', '&quot;').replaceAll('<', '&lt;')}" `);
  } finally {
    view.finalize();
  }
}

/** A vega/vega-lite logger that keeps warnings and errors in `sink` (or drops them) instead of printing. */
function collectingLogger(sink: string[] | undefined) {
  let level = 1;
  const keep = (kind: string) => (...args: readonly unknown[]) => {
    sink?.push(`${kind}: ${args.map(String).join(' ')}`);
    return logger;
  };
  const logger = {
    level(next?: number) {
      if (next === undefined) return level as never;
      level = next;
      return logger as never;
    },
    error: keep('error'),
    warn: keep('warn'),
    info: () => logger,
    debug: () => logger,
  };
  return logger;
}
