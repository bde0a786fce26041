/**
 * Stored checkpoints, findings log records and incident records: deflated above a size, as bytes (`z3:`), read back
 * exactly; the earlier text forms (`z2:`, `z1:`, plain JSON) still read, as bytes or as text.
 */
import { deflateRawSync, inflateRawSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { COMPACT_DICTIONARY_Z2 } from '../../src/redis/compactDictionary.ts';
import { COMPACT_FROM_CHARS, compactValue, expandValue } from '../../src/redis/compactText.ts';
import { z1Form, z2Form } from '../helpers/earlierStoredForms.ts';

describe('compact stored values', () => {
  const long = JSON.stringify({ sampleId: 'MLAB-1-0042', findings: Array.from({ length: 6 }, (_, i) => ({ measurand: 'Fe', rule: 'ewma', value: i * 1.5, explanation: 'Fe (iron) is accumulating faster than before (ünïcode kept)' })) });
  const record = JSON.stringify({
    sampleId: 'MLAB-7-0042',
    sampledAt: '2026-03-04T05:06:07.000Z',
    findings: [
      {
        unit: 'HT-7',
        component: 'engine',
        group: 'haul-trucks',
        sampleId: 'MLAB-7-0042',
        sampledAt: '2026-03-04T05:06:07.000Z',
        measurand: 'Fe',
        rule: 'limit',
        disposition: 'incident',
        severity: 'caution',
        value: 61,
        threshold: 60,
        basis: 'reading',
        explanation:
          'Fe 61 ppm is above the caution level of 60 ppm set for group haul-trucks. It may point to gears, bearings, shafts, liners wearing faster; next: re-sample to confirm (same sample point, machine running at working temperature), and ask the lab to review the trend.',
      },
    ],
  });

  it('shrinks a single findings log record to a fraction of what deflate alone makes of it', () => {
    const alone = deflateRawSync(Buffer.from(record, 'utf8')).length;
    const stored = compactValue(record) as Buffer;
    expect(expandValue(stored)).toBe(record);
    expect(stored.length).toBeLessThan(alone / 2);
  });

  it('keeps short values as they are', () => {
    const short = '{"a":1}';
    expect(short.length).toBeLessThan(COMPACT_FROM_CHARS);
    expect(compactValue(short)).toBe(short);
    expect(expandValue(short)).toBe(short);
  });

  it('writes the deflated bytes themselves (z3), a quarter shorter than the base64 text form, and any raw-deflate decoder with the dictionary reads them', () => {
    for (const text of [long, record]) {
      const stored = compactValue(text);
      expect(Buffer.isBuffer(stored)).toBe(true);
      const bytes = stored as Buffer;
      expect(bytes.subarray(0, 3).toString('latin1')).toBe('z3:');
      expect(inflateRawSync(bytes.subarray(3), { dictionary: Buffer.from(COMPACT_DICTIONARY_Z2, 'utf8') }).toString('utf8')).toBe(text);
      expect(expandValue(bytes)).toBe(text);
      // base64 takes 4 characters for 3 bytes: the bytes are at most three quarters of the text form (and its mark).
      expect(bytes.length - 3).toBeLessThanOrEqual(Math.ceil(((z2Form(text).length - 3) * 3) / 4));
    }
  });

  it('reads every earlier form, whether Redis hands it over as bytes or as text', () => {
    const forms = [z2Form(long), z1Form(long), long];
    for (const form of forms) {
      expect(expandValue(form)).toBe(long);
      expect(expandValue(Buffer.from(form, 'utf8'))).toBe(long);
    }
    const short = '{"unit":"PS1-P2"}';
    expect(compactValue(short)).toBe(short);
    expect(expandValue(Buffer.from(short, 'utf8'))).toBe(short);
  });
});
