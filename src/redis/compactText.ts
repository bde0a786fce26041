/**
 * Compact storage of the larger JSON values of a component (checkpoints of the analysis state, findings log
 * records): above a small size they are stored deflated (RFC 1951, raw) in base64 behind the marker `z1:`, which
 * no JSON text starts with. Values written before, as plain JSON, still read. The Lua scripts treat these values
 * as opaque strings.
 */
import { deflateRawSync, inflateRawSync } from 'node:zlib';

const MARK = 'z1:';
/** Shorter texts are kept as they are: deflate and base64 would not save enough to matter. */
export const COMPACT_FROM_CHARS = 160;

export function compactText(text: string): string {
  if (text.length < COMPACT_FROM_CHARS) return text;
  return MARK + deflateRawSync(Buffer.from(text, 'utf8'), { level: 6 }).toString('base64');
}

export function expandText(stored: string): string {
  return stored.startsWith(MARK) ? inflateRawSync(Buffer.from(stored.slice(MARK.length), 'base64')).toString('utf8') : stored;
}
