/**
 * Paging the incident list. A page ends at a position in the list's order (the index it was read from, the incident's
 * sort key there and its id); the next page starts strictly after it. The position travels to the next request as an
 * opaque cursor bound to the filter it was made for, so that it cannot continue a different list.
 */
import { z } from 'zod';
import { IncidentFilterSchema, type IncidentFilter } from './listFilter.ts';
import type { IncidentSummary } from './model.ts';

/** The list's two parts: open incidents first, then (state closed or all) closed ones. */
export type ListIndex = 'open' | 'closed';

/** Where a page ended: the last incident shown, by the index it came from and its sort key there. */
export interface ListPosition {
  readonly index: ListIndex;
  readonly key: number;
  readonly id: string;
}

export interface IncidentPage {
  readonly incidents: IncidentSummary[];
  /** Where this page ended when more incidents match after it; null when it holds the last of them. */
  readonly next: ListPosition | null;
  /** How many incidents match in all, when that is known without reading every record; null otherwise. */
  readonly total: number | null;
}

/** The longest cursor taken: a cursor holds an incident id, whose path form is bounded by 2 304 characters. */
export const MAX_CURSOR_LENGTH = 4096;

/** The list's query: the filter, and where to continue. */
export const IncidentListQuerySchema = IncidentFilterSchema.extend({
  cursor: z
    .string()
    .min(1, 'empty: leave the parameter out for the first page')
    .max(MAX_CURSOR_LENGTH, `longer than ${MAX_CURSOR_LENGTH} characters: not a cursor this list gave`)
    .optional()
    .describe(
      'The `next` value of the previous page, unchanged: the list continues after that page, in the same order. Give it with the same state, severity, unit and group as the request that returned it (limit may differ).',
    ),
});
export type IncidentListQuery = z.infer<typeof IncidentListQuerySchema>;

const VERSION = 1;
const INDEX_CODES: Record<ListIndex, string> = { open: 'o', closed: 'c' };

/** The filter's fields that choose the incidents (not the limit): a cursor continues only the list they define. */
function fingerprint(filter: IncidentFilter): string {
  const severity = filter.severity === undefined ? null : [...new Set(filter.severity)].sort();
  const text = JSON.stringify([filter.state, severity, filter.unit ?? null, filter.group ?? null]);
  // FNV-1a, 32 bits: tells lists apart; a cursor carries no secret, so it needs no signature.
  let h = 0x811c9dc5;
  for (let i = 0; i < text.length; i++) h = Math.imul(h ^ text.charCodeAt(i), 0x01000193);
  return (h >>> 0).toString(36);
}

/** Which indexes a filter reads, in the list's order. */
export function listIndexes(filter: Pick<IncidentFilter, 'state'>): ListIndex[] {
  if (filter.state === 'closed') return ['closed'];
  if (filter.state === 'all') return ['open', 'closed'];
  return ['open'];
}

export function encodeCursor(filter: IncidentFilter, position: ListPosition): string {
  return Buffer.from(JSON.stringify([VERSION, fingerprint(filter), INDEX_CODES[position.index], position.key, position.id]), 'utf8').toString('base64url');
}

const MALFORMED = 'not a cursor this list gave: pass the "next" value of the previous page unchanged';
const FOREIGN = 'was given for another list: repeat the state, severity, unit and group of the request that returned it, or leave the cursor out to start again';

/** The position a cursor holds, or why it cannot be used with `filter`. */
export function decodeCursor(filter: IncidentFilter, cursor: string): { ok: true; position: ListPosition } | { ok: false; reason: string } {
  if (cursor.length > MAX_CURSOR_LENGTH || !/^[A-Za-z0-9_-]+$/.test(cursor)) return { ok: false, reason: MALFORMED };
  let parsed: unknown;
  try {
    parsed = JSON.parse(Buffer.from(cursor, 'base64url').toString('utf8'));
  } catch {
    return { ok: false, reason: MALFORMED };
  }
  if (!Array.isArray(parsed) || parsed.length !== 5) return { ok: false, reason: MALFORMED };
  const [version, print, code, key, id] = parsed as unknown[];
  const index = (Object.keys(INDEX_CODES) as ListIndex[]).find((i) => INDEX_CODES[i] === code);
  if (version !== VERSION || typeof print !== 'string' || index === undefined || typeof key !== 'number' || !Number.isFinite(key) || typeof id !== 'string' || id.length === 0) {
    return { ok: false, reason: MALFORMED };
  }
  if (print !== fingerprint(filter) || !listIndexes(filter).includes(index)) return { ok: false, reason: FOREIGN };
  return { ok: true, position: { index, key, id } };
}
