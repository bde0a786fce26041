/*
 * Reloading the view shown: after a change, a live event or a reconnect, one reload soon, however many asked. The
 * entry script says which loader the page's view uses.
 */
/* global setTimeout, clearTimeout */

let reloadTimer;
let loader = async () => {};

/** The view's loader, called by every reload. */
export function reloadWith(load) {
  loader = load;
}

export function scheduleReload(delay = 250) {
  clearTimeout(reloadTimer);
  reloadTimer = setTimeout(() => void loader(), delay);
}
