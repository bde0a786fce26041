/*
 * DOM helpers for the board: find an element of the page by id, and build an element whose values go in as text
 * (textContent) or attributes, never as markup.
 */
/* global document */

export const $ = (id) => document.getElementById(id);

export function el(tag, attrs = {}, ...children) {
  const node = document.createElement(tag);
  for (const [key, value] of Object.entries(attrs)) {
    if (value === undefined || value === null || value === false) continue;
    if (key === 'text') node.textContent = value;
    else if (key === 'hidden') node.hidden = Boolean(value);
    else node.setAttribute(key, value === true ? '' : String(value));
  }
  for (const child of children) if (child !== undefined && child !== null) node.append(child);
  return node;
}

/** Says something to screen readers through the page's assertive live region. */
export function announce(message) {
  $('announcer').textContent = message;
}
