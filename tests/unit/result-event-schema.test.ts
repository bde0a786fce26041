/**
 * The published result-event schema (schemas/result-event.schema.json, JSON Schema draft 2020-12,
 * https://json-schema.org/draft/2020-12/json-schema-validation) and the server say the same of a record: a table of
 * records checked by Ajv (its draft 2020-12 class, with ajv-formats for `format: date-time`) against the generated
 * schema, and by the server's own validation (validateResult, as POST /v1/results and the imports use it). What JSON
 * Schema cannot state, the schema's description names, and the second table shows the server refusing it.
 */
import { Ajv2020 } from 'ajv/dist/2020.js';
import formats from 'ajv-formats';
import { describe, expect, it } from 'vitest';
import { publishedSchemas } from '../../src/cli/commands/schema.ts';
import { validateResult } from '../../src/intake/validate.ts';

const NOW = Date.parse('2026-03-02T00:00:00Z');
const base = { sampleId: 'LAB-1', unit: 'PS2-P4', component: 'gearbox', sampledAt: '2026-03-01T08:00:00Z', readings: { Fe: 3 } };

// The schema as the file holds it: written as JSON (a key set to undefined in the generated object is not in the file).
const schema = JSON.parse(JSON.stringify(publishedSchemas()['result-event.schema.json'])) as Record<string, unknown>;
// ajv-formats is CommonJS: its plugin is the default export's default.
const addFormats = formats as unknown as typeof formats.default;
const ajv = new Ajv2020({ strict: true, allErrors: true });
addFormats(ajv);
const validate = ajv.compile(schema);

const server = (record: unknown) => validateResult(record, { now: NOW }).ok;
const schemaSays = (record: unknown) => validate(record) === true;

/** [what, record, taken]: `taken` is what the server does with it, and what the schema must say. */
const AGREED: [string, unknown, boolean][] = [
  ['a plain record', base, true],
  ['a unit with "/"', { ...base, unit: 'PS2/P4' }, false],
  ['a component with "/"', { ...base, component: 'gear/box' }, false],
  ['a group with "/" (only unit and component are parts of an id)', { ...base, group: 'gearboxes/2' }, true],
  ['a measurand in the wrong case: fe', { ...base, readings: { fe: 3 } }, false],
  ['a measurand in the wrong case: TBN', { ...base, readings: { TBN: 7 } }, false],
  ['tbn as the catalogue writes it', { ...base, readings: { tbn: 7 } }, true],
  ['no readings', { ...base, readings: {} }, false],
  ['sampled before 1970', { ...base, sampledAt: '1969-12-31T23:59:59Z' }, false],
  ['a year typed wrong', { ...base, sampledAt: '0202-03-01T08:00:00Z' }, false],
  ['sampled at the first instant taken', { ...base, sampledAt: '1970-01-01T00:00:00Z' }, true],
  ['a number above the bound of its unit (fuel, %)', { ...base, readings: { fuel: 100.5 } }, false],
  ['a number at the bound of its unit (fuel, %)', { ...base, readings: { fuel: 100 } }, true],
  ['a number above the bound of its unit (Fe, ppm)', { ...base, readings: { Fe: 1_000_001 } }, false],
  ['a negative number', { ...base, readings: { Fe: -1 } }, false],
  ['a negative number as a string', { ...base, readings: { Fe: '-1' } }, false],
  ['negative zero as a string', { ...base, readings: { Fe: '-0' } }, true],
  ['a number as a string', { ...base, readings: { Fe: ' 12.5 ' } }, true],
  ['a censored reading', { ...base, readings: { Fe: '<1', Si: '> 5000' } }, true],
  ['an empty reading', { ...base, readings: { Fe: '' } }, false],
  ['"NaN"', { ...base, readings: { Fe: 'NaN' } }, false],
  ['"Infinity"', { ...base, readings: { Fe: 'Infinity' } }, false],
  ['an ISO 4406 code', { ...base, readings: { iso4406: '18/16/13' } }, true],
  ['an ISO 4406 code of a microscope count', { ...base, readings: { iso4406: '-/16/13' } }, true],
  ['an ISO 4406 code with spaces', { ...base, readings: { iso4406: ' 18 / 16 / 13 ' } }, true],
  ['an ISO 4406 code of two parts', { ...base, readings: { iso4406: '16/13' } }, false],
  ['an ISO 4406 scale number above 28', { ...base, readings: { iso4406: '29/16/13' } }, false],
  ['an ISO 4406 code as a number', { ...base, readings: { iso4406: 18 } }, false],
  ['a censored ISO 4406 code', { ...base, readings: { iso4406: '<18' } }, false],
  ['a sampleId with a leading space (trimmed)', { ...base, sampleId: ' LAB-1' }, true],
  ['a unit with a trailing tab (trimmed)', { ...base, unit: 'PS2-P4\t' }, true],
  ['a sampleId of white space only', { ...base, sampleId: '   ' }, false],
  ['an empty sampleId', { ...base, sampleId: '' }, false],
  ['a sampleId of 80 characters and a space', { ...base, sampleId: ` ${'L'.repeat(80)}` }, true],
  ['a sampleId of 81 characters', { ...base, sampleId: 'L'.repeat(81) }, false],
  ['a sampleId starting with punctuation', { ...base, sampleId: '#12' }, false],
  ['an unknown field', { ...base, colour: 'amber' }, false],
  ['negative oil hours', { ...base, oilHours: -1 }, false],
  ['a revision that is not whole', { ...base, revision: 1.5 }, false],
  ['sampledAt without a zone', { ...base, sampledAt: '2026-03-01T08:00:00' }, false],
];

/** What JSON Schema cannot state: the schema takes these, the server refuses them, and the description names each. */
const SERVER_CHECKS_MORE: [string, unknown, RegExp][] = [
  ['a number string above the bound of its unit', { ...base, readings: { Fe: '2000000' } }, /a reading written as a string \(a number or a censored bound/],
  ['a censored bound above the bound of its unit', { ...base, readings: { fuel: '>500' } }, /within the bound of its unit/],
  ['a number string beyond the floating-point range', { ...base, readings: { Fe: '1e400' } }, /a number string that is finite/],
  ['a time on 1970-01-01 whose offset puts it in 1969', { ...base, sampledAt: '1970-01-01T00:30:00+01:00' }, /sampledAt on 1970-01-01 with an offset/],
  ['a name NFKC turns into a character outside the set', { ...base, unit: 'Pump ½' }, /after trimming and Unicode NFKC normalisation/],
];

describe('the published result-event schema and the server agree', () => {
  it.each(AGREED)('%s', (_what, record, taken) => {
    expect(server(record)).toBe(taken);
    expect(schemaSays(record), ajv.errorsText(validate.errors)).toBe(taken);
  });

  it.each(SERVER_CHECKS_MORE)('the server checks more: %s', (_what, record, named) => {
    expect(schemaSays(record)).toBe(true);
    expect(server(record)).toBe(false);
    expect(schema.description).toMatch(named);
  });

  it('the one known case the other way round is described: full-width punctuation taken in its NFKC form', () => {
    const record = { ...base, unit: 'PS2\uFF0DP4' };
    expect(server(record)).toBe(true);
    expect(schemaSays(record)).toBe(false);
    expect(schema.description).toContain('full-width punctuation');
  });

  it('the file in schemas/ is the schema checked here (npm run docs)', async () => {
    const { readFileSync } = await import('node:fs');
    expect(JSON.parse(readFileSync('schemas/result-event.schema.json', 'utf8'))).toEqual(schema);
  });
});
