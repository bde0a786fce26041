/*
 * A trend chart in the page: an SVG our own server draws, parsed as SVG and stripped of anything active (scripts,
 * foreign objects, event handlers, javascript: addresses) before it is shown.
 */
/* global document, DOMParser, URLSearchParams */
import { el } from './dom.js';
import { apiComponentPath } from './paths.js';
import { api, problemText } from './session.js';

/** Drawn narrower than the card, so that scaling it up makes its words larger on a wall screen. */
export async function loadChart(container, unit, component, measurand, width = 640) {
  const query = new URLSearchParams({ measurand, title: 'none', width: String(width) });
  const result = await api(`${apiComponentPath(unit, component)}/chart.svg?${query}`);
  container.replaceChildren();
  if (!result.ok) {
    container.append(el('p', { class: 'chart-problem', text: `Chart of ${measurand} not available: ${problemText(result)}` }));
    return;
  }
  const doc = new DOMParser().parseFromString(result.body, 'image/svg+xml');
  const svg = doc.documentElement;
  if (svg.nodeName !== 'svg') {
    container.append(el('p', { class: 'chart-problem', text: `Chart of ${measurand} could not be read.` }));
    return;
  }
  for (const active of svg.querySelectorAll('script, foreignObject')) active.remove();
  for (const node of [svg, ...svg.querySelectorAll('*')]) {
    for (const attr of [...node.attributes]) if (/^on/i.test(attr.name) || /javascript:/i.test(attr.value)) node.removeAttribute(attr.name);
  }
  container.append(document.importNode(svg, true));
}
