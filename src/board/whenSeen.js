/*
 * Loads that wait until their element is about to be seen, a few at a time. A board of hundreds of incidents would
 * otherwise start a chart request per card at once, and an acknowledgement would wait behind all of them (the browser
 * opens only a few connections per server, one of them held by the event stream).
 */
/* global IntersectionObserver */

/** Loads in flight at most: leaves the browser's remaining connections to the event stream and to actions. */
const MOST_AT_ONCE = 4;
/** How far outside the window an element counts as about to be seen, so that scrolling finds it drawn. */
const AHEAD = '600px 0px';

/** The latest load asked for each element, until it starts. */
const due = new Map();
const seen = new Set();
const queue = [];
let running = 0;

const observer = new IntersectionObserver(
  (entries) => {
    for (const entry of entries) {
      if (entry.isIntersecting) {
        seen.add(entry.target);
        enqueue(entry.target);
      } else {
        seen.delete(entry.target);
      }
    }
  },
  { rootMargin: AHEAD },
);

/** Runs `load` once `element` is near the window, after the loads asked before it; a later ask replaces an earlier one not yet started. */
export function loadWhenSeen(element, load) {
  due.set(element, load);
  observer.observe(element);
  if (seen.has(element)) enqueue(element);
}

function enqueue(element) {
  if (!due.has(element) || queue.includes(element)) return;
  queue.push(element);
  pump();
}

function pump() {
  while (running < MOST_AT_ONCE && queue.length > 0) {
    const element = queue.shift();
    const load = due.get(element);
    due.delete(element);
    // A card removed meanwhile needs nothing drawn any more.
    if (load === undefined || !element.isConnected) {
      forget(element);
      continue;
    }
    running += 1;
    void Promise.resolve()
      .then(load)
      .catch(() => {})
      .finally(() => {
        running -= 1;
        pump();
      });
  }
}

/** Stops watching an element whose card has left the page. */
export function forget(element) {
  due.delete(element);
  seen.delete(element);
  observer.unobserve(element);
}
