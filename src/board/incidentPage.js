/*
 * The incident page, where e-mail links lead: one incident's card with all its evidence, its timeline, and the trend
 * of every measurand of its evidence.
 */
/* global document */
import { cards, createCard, updateCard } from './card.js';
import { loadChart } from './chart.js';
import { $, el } from './dom.js';
import { measurandsOf, mergedTimeline, noChartText, severityWords, timelineText } from './incidentText.js';
import { page } from './page.js';
import { componentPath, incidentPath } from './paths.js';
import { markLoaded } from './reload.js';
import { api, problemText } from './session.js';
import { showSignIn } from './signInView.js';

export async function loadIncidentPage() {
  const result = await api(incidentPath(page.incidentId));
  if (result.status === 401) return showSignIn('The token is no longer accepted; please sign in again.');
  const problem = $('incident-problem');
  if (!result.ok) {
    // Nothing of an incident to show: no empty timeline or trends under the problem, no link to a component.
    $('incident-body').hidden = true;
    $('incident-component-crumb').hidden = true;
    problem.hidden = false;
    problem.textContent = result.status === 404 ? `No incident "${page.incidentId}" is known here.` : `The incident could not be loaded. ${problemText(result)}`;
    return;
  }
  markLoaded();
  problem.hidden = true;
  $('incident-body').hidden = false;
  $('incident-component-crumb').hidden = false;
  const incident = result.body.incident;
  $('view-title').textContent = `Incident on ${incident.unit} / ${incident.component}`;
  document.title = `${incident.unit} / ${incident.component}: ${severityWords(incident.severity, incident.peakSeverity)} · wearshift`;
  $('incident-component').href = componentPath(incident.unit, incident.component);
  $('incident-component').textContent = `all of ${incident.unit} / ${incident.component}`;
  let card = cards.get(incident.id);
  if (card === undefined) {
    card = createCard(incident);
    cards.set(incident.id, card);
    $('incident-card').replaceChildren(card.node);
  }
  updateCard(card, incident);
  card.node.dataset.closed = String(Boolean(incident.closed));
  $('incident-timeline').replaceChildren(...mergedTimeline(incident).map((entry) => el('li', { text: timelineText(entry) })));
  const charts = $('incident-charts');
  const wanted = measurandsOf(incident);
  if (wanted.length === 0) {
    // Nothing to chart (a fault of the whole sample, or findings that no longer hold): why, not an empty section.
    delete charts.dataset.measurands;
    charts.replaceChildren(el('p', { class: 'chart-problem', text: noChartText(incident) }));
  } else if (charts.dataset.measurands !== wanted.join(',')) {
    charts.dataset.measurands = wanted.join(',');
    charts.replaceChildren(
      ...wanted.map((m) => {
        const holder = el('div', { class: 'chart', 'data-measurand': m }, el('p', { class: 'loading', text: 'Loading…' }));
        void loadChart(holder, incident.unit, incident.component, m, 760);
        return el('figure', {}, el('figcaption', { text: `Trend of ${m}` }), holder);
      }),
    );
  }
}
