/**
 * Compact storage of the larger JSON values of a component (checkpoints of the analysis state, findings log
 * records): above a small size they are stored deflated (RFC 1951, raw) in base64 behind a marker no JSON text
 * starts with. `z2:` is deflated against a preset dictionary of typical texts (compactDictionary.ts), which a short
 * record profits from most; `z1:` (deflated without one) and plain JSON, written before, still read. The Lua
 * scripts treat these values as opaque strings.
 */
import { deflateRawSync, inflateRawSync } from 'node:zlib';
import { COMPACT_DICTIONARY_Z2 } from './compactDictionary.ts';

const MARK_Z1 = 'z1:';
const MARK_Z2 = 'z2:';
const DICTIONARY_Z2 = Buffer.from(COMPACT_DICTIONARY_Z2, 'utf8');
/** Shorter texts are kept as they are: deflate and base64 would not save enough to matter. */
export const COMPACT_FROM_CHARS = 160;

export function compactText(text: string): string {
  if (text.length < COMPACT_FROM_CHARS) return text;
  return MARK_Z2 + deflateRawSync(Buffer.from(text, 'utf8'), { level: 9, dictionary: DICTIONARY_Z2 }).toString('base64');
}

export function expandText(stored: string): string {
  if (stored.startsWith(MARK_Z2)) return inflateRawSync(Buffer.from(stored.slice(MARK_Z2.length), 'base64'), { dictionary: DICTIONARY_Z2 }).toString('utf8');
  if (stored.startsWith(MARK_Z1)) return inflateRawSync(Buffer.from(stored.slice(MARK_Z1.length), 'base64')).toString('utf8');
  return stored;
}
