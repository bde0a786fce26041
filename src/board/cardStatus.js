/* The status line of an incident card: busy, done or error, with what happened in words. */

export function setStatus(card, kind, message) {
  card.status.dataset.kind = kind;
  card.status.textContent = message;
}
