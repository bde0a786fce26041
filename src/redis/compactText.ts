/**
 * Compact storage of the larger JSON values of a component (checkpoints of the analysis state, findings log
 * records, the incident state and incident records): above a small size they are stored deflated (RFC 1951, raw)
 * against a preset dictionary of typical texts (compactDictionary.ts), which a short record profits from most.
 *
 * `z3:` (written now) is followed by the deflated bytes themselves: Redis values are binary-safe, so these values
 * travel as script arguments of their own and are read back as bytes (the `…Buffer` commands of ioredis), never as
 * text. `z2:` (the same deflate in base64, a third longer), `z1:` (deflated without the dictionary, base64) and plain
 * JSON, written before, still read. The Lua scripts treat these values as opaque.
 */
import { deflateRawSync, inflateRawSync } from 'node:zlib';
import { COMPACT_DICTIONARY_Z2 } from './compactDictionary.ts';

const MARK_Z1 = 'z1:';
const MARK_Z2 = 'z2:';
const MARK_Z3 = Buffer.from('z3:', 'latin1');
const DICTIONARY_Z2 = Buffer.from(COMPACT_DICTIONARY_Z2, 'utf8');
/** Shorter texts are kept as they are: deflate would not save enough to matter. */
export const COMPACT_FROM_CHARS = 160;

/** The stored form written now: a short text as it is, a longer one `z3:` and its deflated bytes. */
export function compactValue(text: string): string | Buffer {
  if (text.length < COMPACT_FROM_CHARS) return text;
  return Buffer.concat([MARK_Z3, deflateRawSync(Buffer.from(text, 'utf8'), { level: 9, dictionary: DICTIONARY_Z2 })]);
}

/** The text of a stored value read as bytes (or as text, when it was written as text), whichever form it has. */
export function expandValue(stored: string | Buffer): string {
  if (typeof stored === 'string') return expandText(stored);
  if (stored.subarray(0, MARK_Z3.length).equals(MARK_Z3)) {
    return inflateRawSync(stored.subarray(MARK_Z3.length), { dictionary: DICTIONARY_Z2 }).toString('utf8');
  }
  return expandText(stored.toString('utf8'));
}

/** Reads the text forms written before `z3:`: `z2:` (the same deflate in base64), `z1:` and plain JSON. */
export function expandText(stored: string): string {
  if (stored.startsWith(MARK_Z2)) return inflateRawSync(Buffer.from(stored.slice(MARK_Z2.length), 'base64'), { dictionary: DICTIONARY_Z2 }).toString('utf8');
  if (stored.startsWith(MARK_Z1)) return inflateRawSync(Buffer.from(stored.slice(MARK_Z1.length), 'base64')).toString('utf8');
  return stored;
}
