/**
 * The text forms of a stored value written by earlier versions (src/redis/compactText.ts reads them): `z2:` deflated
 * against the preset dictionary in base64, `z1:` deflated without it. Built here with node's zlib, so that the tests of
 * reading them do not lean on the product's own writer.
 */
import { deflateRawSync } from 'node:zlib';
import { COMPACT_DICTIONARY_Z2 } from '../../src/redis/compactDictionary.ts';
import { COMPACT_FROM_CHARS } from '../../src/redis/compactText.ts';

/** `z2:` as written before `z3:` (short texts were kept as they are). */
export function z2Form(text: string): string {
  if (text.length < COMPACT_FROM_CHARS) return text;
  return `z2:${deflateRawSync(Buffer.from(text, 'utf8'), { level: 9, dictionary: Buffer.from(COMPACT_DICTIONARY_Z2, 'utf8') }).toString('base64')}`;
}

/** `z1:`, the first deflated form. */
export function z1Form(text: string): string {
  return `z1:${deflateRawSync(Buffer.from(text, 'utf8')).toString('base64')}`;
}
