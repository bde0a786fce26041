/*
 * The component page: its incident history (each with its timeline on demand), what the analysis cannot judge yet,
 * and the trend of every measurand with its time-to-limit forecasts.
 */
/* global document, URLSearchParams */
import { loadChart } from './chart.js';
import { $, el } from './dom.js';
import { formatTime } from './format.js';
import { closingVerdictText, FORECAST_CAUTION, mergedTimeline, severityBadge, stateWords, subjectsOf, timelineText } from './incidentText.js';
import { page } from './page.js';
import { apiComponentPath, incidentPagePath, incidentPath } from './paths.js';
import { markLoaded } from './reload.js';
import { api, problemText } from './session.js';
import { showSignIn } from './signInView.js';

export async function loadComponentPage() {
  $('view-title').textContent = `${page.unit} / ${page.component}`;
  document.title = `${page.unit} / ${page.component} · wearshift`;
  const [history, series] = await Promise.all([
    api(`/v1/incidents?${new URLSearchParams({ state: 'all', unit: page.unit, limit: '1000' })}`),
    api(`${apiComponentPath(page.unit, page.component)}/series`),
  ]);
  if (history.status === 401 || series.status === 401) return showSignIn('The token is no longer accepted; please sign in again.');
  if (history.ok && series.ok) markLoaded();
  // A component nobody has sent results for: the problem alone, not an empty history beside it.
  $('component-body').hidden = series.status === 404;
  renderHistory(history);
  renderReadiness(series);
  renderCharts(series);
}

/**
 * What the analysis cannot judge yet and what it needs, per measurand (first-day behaviour). Measurands whose line
 * says the same are listed together ("Fe, Cu, Al: …"), in the order of the first, so that a gap of the whole
 * component (a group too small for the comparison with peers) reads once.
 */
function renderReadiness(result) {
  const list = $('readiness');
  const rows = result.ok ? (result.body.readiness ?? []) : [];
  $('readiness-empty').hidden = rows.length > 0;
  // The summary names its measurand first ("Fe: change detection …"): the rest is what measurands share.
  const byText = new Map();
  for (const r of rows) {
    const lead = `${r.measurand}: `;
    const rest = String(r.summary).startsWith(lead) ? String(r.summary).slice(lead.length) : String(r.summary);
    if (!byText.has(rest)) byText.set(rest, []);
    byText.get(rest).push(r.measurand);
  }
  list.replaceChildren(...[...byText].map(([rest, measurands]) => el('li', { 'data-measurands': measurands.join(' ') }, el('strong', { text: `${measurands.join(', ')}: ` }), rest)));
}

function renderHistory(result) {
  const list = $('history');
  if (!result.ok) {
    list.replaceChildren(el('li', { class: 'note', text: `The incident history could not be loaded. ${problemText(result)}` }));
    return;
  }
  const incidents = result.body.incidents.filter((i) => i.component === page.component).sort((a, b) => Date.parse(b.openedAt) - Date.parse(a.openedAt));
  $('history-empty').hidden = incidents.length > 0;
  list.replaceChildren(
    ...incidents.map((incident) => {
      const timeline = el('ol', { class: 'timeline' });
      const details = el('details', {}, el('summary', { text: 'Timeline' }), timeline);
      details.addEventListener('toggle', async () => {
        if (!details.open || timeline.childElementCount > 0) return;
        const full = await api(incidentPath(incident.id));
        if (!full.ok) return timeline.replaceChildren(el('li', { text: problemText(full) }));
        timeline.replaceChildren(...mergedTimeline(full.body.incident).map((entry) => el('li', { text: timelineText(entry) })));
      });
      return el(
        'li',
        { class: 'incident', 'data-severity': incident.severity, 'data-acknowledged': String(Boolean(incident.acknowledged)) },
        el('div', { class: 'incident-head' }, severityBadge(incident.severity, incident.peakSeverity), el('h3', {}, el('a', { href: incidentPagePath(incident.id), text: `${subjectsOf(incident).join(', ') || 'Incident'} — opened ${formatTime(incident.openedAt)}` }))),
        el('p', { class: 'state' }, el('strong', { text: stateWords(incident) }), incident.closed ? ` · ${incident.closed.how === 'sample-verdict' ? closingVerdictText(incident.closed) : incident.closed.how} ${formatTime(incident.closed.at)}` : ''),
        details,
      );
    }),
  );
}

/** The forecast sentences of one measurand's series, under its chart on the component page. */
function forecastList(m) {
  const limits = m.forecast?.limits ?? [];
  if (limits.length === 0) return [];
  const seen = new Set();
  const lines = limits.filter((l) => !seen.has(l.text) && seen.add(l.text)).map((l) => el('li', { 'data-forecast': l.outcome, text: l.text }));
  return [el('ul', { class: 'evidence forecast', 'aria-label': `Time to limit, ${m.measurand}` }, ...lines), el('p', { class: 'hint', text: FORECAST_CAUTION })];
}

function renderCharts(result) {
  const charts = $('charts');
  if (!result.ok) {
    $('series-note').hidden = false;
    $('series-note').textContent = `No trends: ${problemText(result)}`;
    charts.replaceChildren();
    return;
  }
  $('series-note').hidden = true;
  charts.replaceChildren(
    ...result.body.measurands.map((m) => {
      const holder = el('div', { class: 'chart' }, el('p', { class: 'loading', text: 'Loading…' }));
      void loadChart(holder, page.unit, page.component, m.measurand, 760);
      return el('figure', {}, el('figcaption', { text: `${m.measurand} — ${m.label} (${m.unit})` }), holder, ...forecastList(m));
    }),
  );
}
