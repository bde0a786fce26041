/** Numbers as labs write them: decimal comma or point, an optional thousands separator, censored values such as "<0,5". */

export interface NumberStyle {
  /** The decimal mark. */
  readonly decimal: '.' | ',';
  /** Dropped before parsing; empty for none. */
  readonly thousands: string;
}

const PLAIN = /^[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?$/;

/**
 * Rewrites a number written in `style` to the form JavaScript reads; undefined when it is not one. A thousands
 * separator is taken only between whole groups of three digits before the decimal mark ("1.234,5", "12 345"): a
 * separator anywhere else ("1,5" with a decimal point, "12,34,5") makes the text no number rather than a value ten or
 * a thousand times off. Spaces inside a number count only where the space is the thousands separator.
 */
export function normaliseNumber(text: string, style: NumberStyle): string | undefined {
  const t = text.trim().replace(/\u00a0/g, ' ');
  if (style.thousands !== '' && style.thousands === style.decimal) return undefined;
  const m = /^([-+]?)(.*?)([eE][-+]?\d+)?$/.exec(t);
  if (!m) return undefined;
  const [, sign, body, exponent = ''] = m as unknown as [string, string, string, string | undefined];
  // A point in a file of decimal commas is either mark; neither is guessed.
  if (style.decimal === ',' && style.thousands !== '.' && body.includes('.')) return undefined;
  const mark = body.indexOf(style.decimal);
  let whole = mark < 0 ? body : body.slice(0, mark);
  const fraction = mark < 0 ? undefined : body.slice(mark + 1);
  if (style.thousands !== '' && whole.includes(style.thousands)) {
    const sep = style.thousands.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
    if (!new RegExp(`^\\d{1,3}(?:${sep}\\d{3})+$`).test(whole)) return undefined;
    whole = whole.split(style.thousands).join('');
  }
  const normalised = `${sign}${whole}${fraction === undefined ? '' : `.${fraction}`}${exponent}`;
  return PLAIN.test(normalised) ? normalised : undefined;
}

export function parseNumber(text: string, style: NumberStyle): number | undefined {
  const n = normaliseNumber(text, style);
  if (n === undefined) return undefined;
  const value = Number(n);
  // "1e400" is written like a number but is none a reading can be.
  return Number.isFinite(value) ? value : undefined;
}

/** A censored reading "<0,5" or "> 5000" split into its sign and number; undefined when it is not one. */
export function parseCensored(text: string, style: NumberStyle): { sign: '<' | '>'; limit: number } | undefined {
  const m = /^\s*([<>])\s*=?\s*(.+)$/.exec(text);
  if (!m) return undefined;
  const limit = parseNumber(m[2]!, style);
  return limit === undefined ? undefined : { sign: m[1] as '<' | '>', limit };
}
