/*
 * Reloading the view shown: after a change, a live event or a reconnect, one reload soon, however many asked. The
 * entry script says which loader the page's view uses. The loaders say when they last showed the server's state, so
 * that a board that has lost its live feed can say how old what it shows is.
 */
/* global setTimeout, clearTimeout */

let reloadTimer;
let loader = async () => {};

/** When the view last showed what the server holds (ISO time), or null before the first load. */
export let loadedAt = null;

/** The view's loader, called by every reload. */
export function reloadWith(load) {
  loader = load;
}

/** Called by a view's loader once it has shown what the server answered. */
export function markLoaded() {
  loadedAt = new Date().toISOString();
}

export function scheduleReload(delay = 250) {
  clearTimeout(reloadTimer);
  reloadTimer = setTimeout(() => void loader(), delay);
}
