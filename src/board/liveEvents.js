/*
 * Live updates over server-sent events (the token rides in a cookie, see session.js): an incident change reloads the
 * view that shows it, a new result redraws the charts of its component, and a reconnect reloads whatever was missed.
 */
/* global EventSource */
import { cards, updateCard } from './card.js';
import { $, announce } from './dom.js';
import { formatTime } from './format.js';
import { page, view } from './page.js';
import { scheduleReload } from './reload.js';

let events;
let connectedBefore = false;

export function connectEvents() {
  events = new EventSource('/v1/events');
  const live = $('live');
  events.addEventListener('open', () => {
    live.dataset.live = 'on';
    live.textContent = 'Live updates: connected';
    // Whatever happened while the stream was down is in the next list.
    if (connectedBefore) scheduleReload(0);
    connectedBefore = true;
  });
  events.addEventListener('error', () => {
    const closed = events.readyState === EventSource.CLOSED;
    live.dataset.live = 'lost';
    live.textContent = closed ? 'Live updates: refused by the server (sign in again)' : 'Live updates: reconnecting…';
  });
  events.addEventListener('incident', (message) => {
    const event = JSON.parse(message.data);
    if (view === 'component' && (event.unit !== page.unit || event.component !== page.component)) return;
    if (view === 'incident' && event.incidentId !== undefined && event.incidentId !== page.incidentId) return;
    // The state may name a time ("shelved until …"): read out in the board's one time format.
    const state = String(event.state ?? '').replace(/\d{4}-\d\d-\d\dT\d\d:\d\d(:\d\d(\.\d+)?)?Z/g, (t) => formatTime(t));
    announce(`Incident ${event.change}: ${event.unit} / ${event.component}, ${event.severity}, ${state}.`);
    scheduleReload();
  });
  events.addEventListener('result', (message) => {
    const event = JSON.parse(message.data);
    if (view !== 'component') {
      for (const card of cards.values()) {
        if (card.incident.unit === event.unit && card.incident.component === event.component) {
          card.chartKey = '';
          updateCard(card, card.incident);
        }
      }
    } else if (event.unit === page.unit && event.component === page.component) {
      scheduleReload();
    }
  });
}

export function closeEvents() {
  events?.close();
}
