/**
 * The stored form of a sample. Readings are written in measurand order so that a redelivery whose JSON lists
 * the readings in another order is still recognised as the same result.
 */
import type { Sample } from '../domain/event.ts';

export function canonicalSampleJson(sample: Sample): string {
  const readings = Object.fromEntries(Object.entries(sample.readings).sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0)));
  return JSON.stringify({ ...sample, readings });
}
