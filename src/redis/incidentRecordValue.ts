/**
 * The stored form of an incident record (the `inc:records` hash of a partition), deflated against the preset
 * dictionary (compactText.ts, `z3:`): a record is mostly its timeline (up to 200 entries) and its findings'
 * explanations, which deflate shares well (about a tenth of the JSON on the backfill fleet; about 60 µs a record on two
 * cores). Records are read as bytes; those written before (plain JSON or `z2:`) read the same.
 */
import type { Incident } from '../incidents/model.ts';
import { compactValue, expandValue } from './compactText.ts';

export function incidentRecordValue(incident: Incident): string | Buffer {
  return compactValue(JSON.stringify(incident));
}

export function incidentOfRecord(stored: string | Buffer): Incident {
  return JSON.parse(expandValue(stored)) as Incident;
}
