/**
 * The incidents whose record must be written again: those of `after` that `before` (the state whose records are on
 * file) does not hold with the same text.
 */
import type { ComponentIncidents, Incident } from '../incidents/model.ts';

export function changedIncidents(before: ComponentIncidents, after: ComponentIncidents): Incident[] {
  const old = new Map(Object.values(before.incidents).map((i) => [i.id, JSON.stringify(i)]));
  return Object.values(after.incidents).filter((i) => old.get(i.id) !== JSON.stringify(i));
}
