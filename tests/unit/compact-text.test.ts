/** Stored checkpoints and findings log records: deflated above a size, read back exactly, plain JSON still read. */
import { inflateRawSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { COMPACT_FROM_CHARS, compactText, expandText } from '../../src/redis/compactText.ts';

describe('compactText', () => {
  const long = JSON.stringify({ sampleId: 'MLAB-1-0042', findings: Array.from({ length: 6 }, (_, i) => ({ measurand: 'Fe', rule: 'ewma', value: i * 1.5, explanation: 'Fe (iron) is accumulating faster than before (ünïcode kept)' })) });

  it('stores a long value deflated (RFC 1951) in base64, shorter, and reads it back exactly', () => {
    const stored = compactText(long);
    expect(stored.startsWith('z1:')).toBe(true);
    expect(stored.length).toBeLessThan(long.length / 2);
    // Any raw-deflate decoder reads it: node's zlib, independent of expandText.
    expect(inflateRawSync(Buffer.from(stored.slice(3), 'base64')).toString('utf8')).toBe(long);
    expect(expandText(stored)).toBe(long);
  });

  it('keeps short values and reads plain JSON written before', () => {
    const short = '{"a":1}';
    expect(short.length).toBeLessThan(COMPACT_FROM_CHARS);
    expect(compactText(short)).toBe(short);
    expect(expandText(long)).toBe(long);
  });
});
