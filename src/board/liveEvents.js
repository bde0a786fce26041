/*
 * Live updates over server-sent events (the token rides in a cookie, see session.js): an incident change reloads the
 * view that shows it, a new result redraws the charts of its component, and a reconnect reloads whatever was missed.
 *
 * The browser reconnects by itself after a dropped connection, but gives up for good once an answer is not a stream
 * (a reverse proxy's 502 while the server restarts, a 503 when it serves too many clients, a 401). Only the session
 * check can tell those apart: while the token is accepted, the board reconnects after a growing, capped delay and
 * says meanwhile that what it shows is as of its last load; only a 401 asks to sign in again.
 */
/* global EventSource, setTimeout, clearTimeout */
import { cards, updateCard } from './card.js';
import { $, announce } from './dom.js';
import { formatTime } from './format.js';
import { liveIncidentText } from './incidentText.js';
import { page, view } from './page.js';
import { loadedAt, scheduleReload } from './reload.js';
import { api } from './session.js';

/** Delays between reconnection attempts: doubling from the first to the last, so a long outage costs few requests. */
const RETRY_FIRST_MS = 1_000;
const RETRY_MOST_MS = 30_000;

let events;
let connectedBefore = false;
let retryDelay = RETRY_FIRST_MS;
let retryTimer;
let stopped = false;

export function connectEvents() {
  stopped = false;
  open();
}

function open() {
  events = new EventSource('/v1/events');
  const source = events;
  const live = $('live');
  source.addEventListener('open', () => {
    retryDelay = RETRY_FIRST_MS;
    live.dataset.live = 'on';
    delete live.dataset.stale;
    live.textContent = 'Live updates: connected';
    // Whatever happened while the stream was down is in the next list.
    if (connectedBefore) scheduleReload(0);
    connectedBefore = true;
  });
  source.addEventListener('error', () => {
    if (source !== events) return;
    if (source.readyState === EventSource.CLOSED) void checkThenRetry(source);
    else showStale('reconnecting…');
  });
  source.addEventListener('incident', (message) => {
    const event = JSON.parse(message.data);
    if (view === 'component' && (event.unit !== page.unit || event.component !== page.component)) return;
    if (view === 'incident' && event.incidentId !== undefined && event.incidentId !== page.incidentId) return;
    // The state may name a time ("shelved until …"): read out in the board's one time format.
    const state = String(event.state ?? '').replace(/\d{4}-\d\d-\d\dT\d\d:\d\d(:\d\d(\.\d+)?)?Z/g, (t) => formatTime(t));
    announce(liveIncidentText(event, state));
    scheduleReload();
  });
  source.addEventListener('result', (message) => {
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

/** The stream was refused: a 401 on the session means the token is gone; anything else is worth another try. */
async function checkThenRetry(source) {
  showStale('checking the connection…');
  const session = await api('/v1/session');
  if (stopped || source !== events) return;
  if (session.status === 401) {
    const live = $('live');
    live.dataset.live = 'lost';
    live.textContent = `Live updates: the token is no longer accepted (sign in again); the view shows the state ${asOf()}.`;
    return;
  }
  const delay = retryDelay;
  retryDelay = Math.min(retryDelay * 2, RETRY_MOST_MS);
  showStale(`trying again in ${Math.round(delay / 1000)} s.`);
  clearTimeout(retryTimer);
  retryTimer = setTimeout(() => {
    if (!stopped && source === events) open();
  }, delay);
}

function asOf() {
  return loadedAt === null ? 'of no completed load' : `as of ${formatTime(loadedAt)}`;
}

/** Not connected: the view may be out of date, and since when is what a person needs to judge it. */
function showStale(what) {
  const live = $('live');
  live.dataset.live = 'lost';
  live.dataset.stale = loadedAt ?? '';
  live.textContent = `Live updates: not connected, ${what} The view shows the state ${asOf()}.`;
}

export function closeEvents() {
  stopped = true;
  clearTimeout(retryTimer);
  events?.close();
}
