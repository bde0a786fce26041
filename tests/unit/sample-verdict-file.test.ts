/**
 * The file of responders' words that replay and backtest take (src/intake/sampleVerdictFile.ts): every bad line is
 * named by file, line, field and reason before anything is used; good lines keep their line numbers.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { MAX_WORD_LINES, readSampleVerdictFile } from '../../src/intake/sampleVerdictFile.ts';
import { InputError } from '../../src/domain/errors.ts';

const dir = mkdtempSync(join(tmpdir(), 'wearshift-words-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

function file(name: string, text: string): string {
  const path = join(dir, name);
  writeFileSync(path, text);
  return path;
}

describe('a file of sample verdicts', () => {
  it('reads the words with their lines, skipping blank lines and a byte-order mark', () => {
    const path = file(
      'good.jsonl',
      '\uFEFF{"unit":"GEN-1","component":"engine","sampleId":"G1-27","verdict":"usual-rate","after":"G1-29","by":" reliability engineer ","at":"2026-06-01T09:00:00Z"}\n\n{"unit":"GEN-3","component":"engine","sampleId":"G3-9","verdict":"rejected"}\r\n',
    );
    expect(readSampleVerdictFile(path)).toEqual([
      { line: 1, unit: 'GEN-1', component: 'engine', sampleId: 'G1-27', verdict: 'usual-rate', after: 'G1-29', by: 'reliability engineer', at: '2026-06-01T09:00:00Z' },
      { line: 3, unit: 'GEN-3', component: 'engine', sampleId: 'G3-9', verdict: 'rejected' },
    ]);
  });

  it('names file, line, field and reason of every bad line', () => {
    const path = file(
      'bad.jsonl',
      [
        '{"unit":"GEN-1","component":"engine","sampleId":"G1-27","verdict":"maybe"}',
        'not json',
        '{"unit":"","component":"engine","sampleId":"G1-2","verdict":"confirmed","at":"yesterday"}',
        '{"unit":"GEN-1","component":"engine","sampleId":"G1-3","verdict":"confirmed","by":"two\\nlines","extra":1}',
        '7',
      ].join('\n'),
    );
    let message = '';
    try {
      readSampleVerdictFile(path);
    } catch (e) {
      expect(e).toBeInstanceOf(InputError);
      message = (e as Error).message;
    }
    const lines = message.split('\n');
    expect(lines).toContain(`${path}:1: verdict: expected confirmed, rejected or usual-rate`);
    expect(lines).toContain(`${path}:2: not a JSON object`);
    expect(lines).toContain(`${path}:3: unit: required`);
    expect(lines.some((l) => l.startsWith(`${path}:3: at: expected an ISO 8601 date-time`))).toBe(true);
    expect(lines).toContain(`${path}:4: by: must be one line without control characters`);
    expect(lines.some((l) => l.startsWith(`${path}:4: (line):`) && l.includes('extra'))).toBe(true);
    expect(lines.some((l) => l.startsWith(`${path}:5: (line):`))).toBe(true);
  });

  it('refuses a file longer than a file of words can be, before parsing it', () => {
    const path = file('long.jsonl', '\n'.repeat(MAX_WORD_LINES + 1));
    expect(() => readSampleVerdictFile(path)).toThrow(`more than ${MAX_WORD_LINES} lines`);
  });

  it('says so when the file cannot be read', () => {
    expect(() => readSampleVerdictFile(join(dir, 'missing.jsonl'))).toThrow(/missing\.jsonl: ENOENT/);
  });
});
