/**
 * Text that came from lab feeds and configuration (unit names, explanations) ends up in mail headers, HTML
 * and links. These helpers keep it from breaking out of the place it is put in.
 */

// C0/C1 controls (CR and LF among them), Unicode line separators and bidirectional overrides, which can make
// a subject line read differently from what it says.
const UNSAFE_IN_A_LINE = /[\p{Cc}\u2028\u2029\u202a-\u202e\u2066-\u2069]+/gu;

/** One printable line: controls become spaces, runs of white space collapse, the result is trimmed. */
export function oneLine(text: string): string {
  return text.replace(UNSAFE_IN_A_LINE, ' ').replace(/\s+/g, ' ').trim();
}

/** A header value: one printable line, at most `maxLength` characters (cut with an ellipsis). */
export function headerValue(text: string, maxLength = 200): string {
  const line = oneLine(text);
  return line.length <= maxLength ? line : `${line.slice(0, maxLength - 1).trimEnd()}…`;
}

const HTML_ESCAPES: Record<string, string> = { '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' };

/** Escapes text for HTML element content and quoted attribute values alike. */
export function escapeHtml(text: string): string {
  return text.replace(/[&<>"']/g, (c) => HTML_ESCAPES[c] ?? c);
}

/** A link target we are willing to put in front of a reader: absolute http(s) only, never javascript: or data:. */
export function httpUrl(url: string, what: string): string {
  let parsed: URL;
  try {
    parsed = new URL(url);
  } catch {
    throw new TypeError(`${what} must be an absolute http(s) URL, got "${headerValue(url, 80)}"`);
  }
  if (parsed.protocol !== 'https:' && parsed.protocol !== 'http:') {
    throw new TypeError(`${what} must use http or https, got "${parsed.protocol}"`);
  }
  return parsed.href;
}
