/**
 * The lab mapping file: how one laboratory's export (CSV or Excel workbook) becomes result events. YAML,
 * validated here; the README's mapping reference and `schemas/lab-mapping.schema.json` are generated from
 * this schema (`npm run docs`).
 */
import { z } from 'zod';
import { MEASURAND_NAMES, type Measurand } from '../../domain/measurands.ts';

const measurandName = z.enum(MEASURAND_NAMES as [Measurand, ...Measurand[]], { error: (i) => `unknown measurand "${String(i.input)}"` });
const columnName = z.string().trim().min(1, 'a column name must not be empty').max(200);

/** A field of the event taken from a column or given as a constant for the whole file. */
const source = (what: string) =>
  z
    .union([
      z.object({ column: columnName.describe('The column that holds it.') }).strict(),
      z.object({ value: z.union([z.string().min(1).max(80), z.number(), z.boolean()]).describe('The same value for every row.') }).strict(),
    ])
    .describe(`${what}: \`{ column: NAME }\` or \`{ value: CONSTANT }\`.`);

export const DATE_FORMAT_HELP = 'tokens YYYY, YY, MM, M, DD, D, HH, H, mm, ss; any other character stands for itself; "iso" for ISO 8601';

export const LabMappingSchema = z
  .object({
    layout: z.enum(['wide', 'long']).default('wide').describe('wide: one row per sample, one column per measurand. long: one row per measurand, the rows of a sample next to each other.'),
    sheet: z.union([z.string().min(1), z.number().int().min(1)]).default(1).describe('Excel workbooks: the worksheet, by name or position (1 = first).'),
    headerRow: z.number().int().min(1).default(1).describe('Row (1-based, counting every row of the file or sheet) that holds the column names; rows above it are skipped.'),
    delimiter: z.string().min(1).max(1).default(',').describe('CSV: the cell separator (labs with decimal commas often use ";").'),
    decimal: z.enum(['.', ',']).default('.').describe('The decimal mark of numbers written as text.'),
    thousands: z.enum(['', ' ', '.', ',', "'"]).default('').describe('A thousands separator between groups of three digits before the decimal mark, dropped from numbers written as text ("1.234,5"); a separator elsewhere makes the cell no number. Empty for none; never the decimal mark.'),
    sampledAt: z
      .object({
        column: columnName.describe('The column with the sampling date (or date and time).'),
        timeColumn: columnName.optional().describe('A separate column with the time of day, when the lab splits them.'),
        formats: z.array(z.string().min(1).max(40)).min(1).default(['iso']).describe(`Date formats tried in order: ${DATE_FORMAT_HELP}. Dates typed as dates in a workbook need none.`),
        timeZone: z.string().min(1).default('UTC').describe('Where the lab\'s clock is: "UTC", an offset such as "+02:00", or an IANA zone such as "Europe/Berlin" (local times are converted to UTC).'),
      })
      .strict()
      .describe('When the oil was drawn.'),
    fields: z
      .object({
        sampleId: source('The lab sample number').optional(),
        unit: source('The machine').optional(),
        component: source('The compartment').optional(),
        group: source('The like-for-like population').optional(),
        lab: source('The reporting laboratory').optional(),
        unitHours: source("Hours on the unit's meter").optional(),
        oilHours: source('Hours on the oil charge').optional(),
        topUpLitres: source('Make-up oil in litres').optional(),
        oilChanged: source('Oil changed at this sample (yes/no, true/false, 1/0, x)').optional(),
        componentChanged: source('Component replaced at this sample (yes/no, true/false, 1/0, x)').optional(),
        revision: source('Re-issue number of the result').optional(),
      })
      .strict()
      .default({})
      .describe('Event fields by column or constant; sampleId, unit and component are required.'),
    charge: z
      .object({
        column: columnName.describe('The charge (oil-fill) number column.'),
        firstRow: z.enum(['same', 'changed']).default('same').describe('What the first sample of a component in the file counts as: same = the charge it was already on, changed = a new charge.'),
      })
      .strict()
      .optional()
      .describe('A charge-number column sets oilChanged when the number differs from the last accepted sample of the same unit and component in the file; a number going backwards is an error (rows in sampling order).'),
    measurands: z
      .array(
        z
          .object({
            measurand: measurandName.describe('The catalogue name.'),
            names: z.array(columnName).min(1).describe('wide: column headers; long: values of the measurand column that mean this measurand.'),
            unit: z.string().min(1).max(20).optional().describe('The unit the lab reports in (wide layout, or long rows without a unit cell); default the catalogue unit.'),
          })
          .strict(),
      )
      .default([])
      .describe('Measurands and their aliases. A column or name equal to a catalogue name needs no entry.'),
    long: z
      .object({
        measurandColumn: columnName.describe('The column naming the measurand.'),
        valueColumn: columnName.describe('The column with the result.'),
        unitColumn: columnName.optional().describe('The column with the unit of the result.'),
      })
      .strict()
      .optional()
      .describe('Long layout: where the measurand, value and unit are.'),
    ignore: z.array(columnName).default([]).describe('Wide layout: columns that are not carried over (customer, oil brand, remarks); wide-layout columns neither mapped nor ignored stop the import, so nothing is dropped unseen. Long layout: measurand names skipped.'),
  })
  .strict()
  .superRefine((m, ctx) => {
    for (const f of ['sampleId', 'unit', 'component'] as const) {
      if (m.fields[f] === undefined) ctx.addIssue({ code: 'custom', path: ['fields', f], message: `${f} is required: give { column: NAME } or { value: CONSTANT }` });
    }
    if (m.thousands === m.decimal) {
      ctx.addIssue({ code: 'custom', path: ['thousands'], message: `"${m.thousands}" is also the decimal mark: one character cannot be both (1${m.decimal}5 would read as 15)` });
    }
    if (m.layout === 'long' && m.long === undefined) ctx.addIssue({ code: 'custom', path: ['long'], message: 'the long layout needs long.measurandColumn and long.valueColumn' });
    if (m.charge !== undefined && m.fields.oilChanged !== undefined) ctx.addIssue({ code: 'custom', path: ['charge'], message: 'give either charge or fields.oilChanged, not both' });
    const seen = new Map<string, string>();
    for (const entry of m.measurands) {
      for (const name of entry.names) {
        const key = name.toLowerCase();
        const before = seen.get(key);
        if (before !== undefined && before !== entry.measurand) ctx.addIssue({ code: 'custom', path: ['measurands'], message: `"${name}" is given for both ${before} and ${entry.measurand}` });
        seen.set(key, entry.measurand);
      }
    }
  });

export type LabMapping = z.infer<typeof LabMappingSchema>;
export type FieldSource = NonNullable<LabMapping['fields']['unit']>;
export type MappedField = keyof LabMapping['fields'];
