/*
 * The status line of an incident card (busy, done or error, with what happened in words), and its one request at a
 * time: while a request of the card is on its way, its actions are marked unavailable and ignore presses, so that
 * nothing is sent twice.
 */

export function setStatus(card, kind, message) {
  card.status.dataset.kind = kind;
  card.status.textContent = message;
}

/**
 * Marks the card's actions unavailable while a request is on its way, with aria-disabled rather than disabled: a
 * disabled button drops the keyboard focus to the page, and the card's handlers ignore presses meanwhile anyway.
 */
export function markPending(card) {
  for (const button of [...Object.values(card.buttons), ...Object.values(card.verdicts)]) {
    if (card.pending) button.setAttribute('aria-disabled', 'true');
    else button.removeAttribute('aria-disabled');
  }
  card.node.dataset.pending = String(card.pending);
}

/**
 * Sends one request for the card, none while another is on its way (undefined then); the card is drawn again after
 * the answer, whatever it is, so that its buttons follow the incident again.
 */
export async function sendFor(card, send) {
  if (card.pending) return undefined;
  card.pending = true;
  markPending(card);
  try {
    return await send();
  } finally {
    card.pending = false;
    card.redraw();
  }
}
