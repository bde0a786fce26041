/** Which incidents a list shows: the same filter for the HTTP API and the command line. */
import { z } from 'zod';
import { SEVERITIES } from '../domain/finding.ts';
import type { IncidentSummary } from './model.ts';

export const INCIDENT_STATE_FILTERS = ['open', 'active', 'returned', 'unacknowledged', 'acknowledged', 'shelved', 'closed', 'all'] as const;
export type IncidentStateFilter = (typeof INCIDENT_STATE_FILTERS)[number];

const severityList = z
  .string()
  .transform((s) => s.split(',').map((p) => p.trim()))
  .pipe(z.array(z.enum(SEVERITIES, { error: (i) => `unknown severity "${String(i.input)}" (watch, caution, alarm)` })));

/** The most incidents one list gives. */
export const MAX_LIST_LIMIT = 1000;

/** Query-string shape: every value arrives as a string. */
export const IncidentFilterSchema = z
  .object({
    state: z
      .enum(INCIDENT_STATE_FILTERS, { error: (i) => `unknown state "${String(i.input)}" (${INCIDENT_STATE_FILTERS.join(', ')})` })
      .default('open')
      .describe('open: every incident not closed (the default); all: closed ones too.'),
    severity: severityList.optional().describe('One severity or a comma-separated list.'),
    unit: z.string().min(1).optional(),
    group: z.string().min(1).optional(),
    limit: z.coerce.number().int().min(1).max(MAX_LIST_LIMIT).default(100).describe(`The most incidents one list (one page) gives: 1 to ${MAX_LIST_LIMIT}, default 100.`),
  })
  .strict();
export type IncidentFilter = z.infer<typeof IncidentFilterSchema>;

export function matchesFilter(incident: IncidentSummary, filter: IncidentFilter): boolean {
  if (filter.severity !== undefined && !filter.severity.includes(incident.severity)) return false;
  if (filter.unit !== undefined && incident.unit !== filter.unit) return false;
  if (filter.group !== undefined && incident.group !== filter.group) return false;
  const open = incident.closed === null;
  switch (filter.state) {
    case 'all':
      return true;
    case 'open':
      return open;
    case 'closed':
      return !open;
    case 'active':
      return open && incident.alarm === 'active';
    case 'returned':
      return open && incident.alarm === 'returned';
    case 'acknowledged':
      return open && incident.acknowledged !== null;
    case 'unacknowledged':
      return open && incident.acknowledged === null;
    case 'shelved':
      return open && incident.shelved !== null;
  }
}
