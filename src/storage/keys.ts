/**
 * Key layout of the stored state. Every key starts with the configured prefix (default `{wearshift}`); the
 * braces make it a Redis Cluster hash tag, so all keys of the application live in one slot and the Lua
 * scripts, which touch several keys at once, stay legal on a cluster. BullMQ's own keys use the same prefix
 * followed by the queue name (`{wearshift}:results:…`), which never collides with `store` or `eval`.
 */
import { componentKey } from '../domain/event.ts';
import type { ComponentRef } from './storage.ts';

export const DEFAULT_PREFIX = '{wearshift}';

export function storageKeys(prefix: string) {
  const c = (part: string) => (ref: ComponentRef) => `${prefix}:${part}:${componentKey(ref)}`;
  return {
    /** hash `sampleId␟revision` → sample JSON: every revision ever stored. */
    revisions: c('store:rev'),
    /** hash sampleId → revision in force. */
    winners: c('store:win'),
    /** sorted set sampleId by sampledAt (ms) of the revision in force. */
    times: c('store:time'),
    /** hash sampleId → the population share of the revision in force (to take out when replaced). */
    contributions: c('store:contrib'),
    /** hash component key → {unit, component, group}. */
    registry: `${prefix}:store:components`,
    /** Population sums of a group live under this prefix + group name (a hash, and sorted sets of values). */
    populationPrefix: `${prefix}:pop:`,
    /** counter: grows with every stored change of the component. */
    mark: c('eval:mark'),
    /** the mark covered by the last committed evaluation. */
    evaluated: c('eval:done'),
    lock: c('eval:lock'),
    /** JSON {sampleId, time} of the last step fed to the incident engine. */
    fed: c('eval:fed'),
    /** hash sampleId → step JSON, and the sorted set ordering (and bounding) it. */
    steps: c('eval:steps'),
    stepTimes: c('eval:steptime'),
    /** Baseline sums of a group: hash component key → JSON, under this prefix + group name. */
    baselinesPrefix: `${prefix}:eval:baselines:`,
    /** The group whose baseline hash holds the component's sums (so a group change moves them). */
    baselineGroup: c('eval:baselinegroup'),
  };
}

export type StorageKeys = ReturnType<typeof storageKeys>;
