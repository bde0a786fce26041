/** Numbers as labs write them: decimal comma or point, an optional thousands separator, censored values such as "<0,5". */

export interface NumberStyle {
  /** The decimal mark. */
  readonly decimal: '.' | ',';
  /** Dropped before parsing; empty for none. */
  readonly thousands: string;
}

const PLAIN = /^[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?$/;

/** Rewrites a number written in `style` to the form JavaScript reads; undefined when it is not one. */
export function normaliseNumber(text: string, style: NumberStyle): string | undefined {
  let t = text.trim().replace(/\u00a0/g, ' ');
  if (style.thousands !== '') t = t.split(style.thousands).join('');
  if (style.decimal === ',') {
    if (t.includes('.') && style.thousands !== '.') return undefined;
    t = t.replace(',', '.');
  }
  t = t.replace(/\s+/g, '');
  return PLAIN.test(t) ? t : undefined;
}

export function parseNumber(text: string, style: NumberStyle): number | undefined {
  const n = normaliseNumber(text, style);
  return n === undefined ? undefined : Number(n);
}

/** A censored reading "<0,5" or "> 5000" split into its sign and number; undefined when it is not one. */
export function parseCensored(text: string, style: NumberStyle): { sign: '<' | '>'; limit: number } | undefined {
  const m = /^\s*([<>])\s*=?\s*(.+)$/.exec(text);
  if (!m) return undefined;
  const limit = parseNumber(m[2]!, style);
  return limit === undefined ? undefined : { sign: m[1] as '<' | '>', limit };
}
