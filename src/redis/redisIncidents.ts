/**
 * The incident API over Redis: reading incidents (one, a list across partitions), an operator's action or a delayed
 * escalation check (read the component's incidents, run the pure engine, commit with a compare-and-set on their
 * version together with the records, the list indexes and the outbox of messages — all or nothing), and handing the
 * outbox over to the queues. Evaluations write the same keys in their commit (redisStore.ts).
 */
import type { Step } from '../analysis/model.ts';
import type { IncidentStep } from '../incidents/applySteps.ts';
import { applyAction, type ActionResult, type IncidentAction } from '../incidents/applyAction.ts';
import { applyEscalationCheck, type EscalationCheck } from '../incidents/applyEscalationCheck.ts';
import { applySteps } from '../incidents/applySteps.ts';
import { IncidentConflictError, IncidentNotFoundError } from '../incidents/errors.ts';
import { matchesFilter, type IncidentFilter } from '../incidents/listFilter.ts';
import { listIndexes, type IncidentPage, type ListIndex, type ListPosition } from '../incidents/listPage.ts';
import { emptyComponentIncidents, findIncident, summarize, type ComponentIncidents, type Incident, type IncidentEffect, type IncidentSummary, type NotifyEffect } from '../incidents/model.ts';
import type { IncidentRules } from '../incidents/policy.ts';
import { applySampleVerdict, type SampleVerdictWord } from '../incidents/sampleVerdict.ts';
import { withdrawMessage, type MessageWithdrawal } from '../incidents/withdrawal.ts';
import { changedIncidents } from './changedIncidents.ts';
import { compactValue, expandValue } from './compactText.ts';
import { incidentOfRecord } from './incidentRecordValue.ts';
import { componentKeys, partitionKeys, Partitions } from './keys.ts';
import { incidentRecordRows, type RedisConnection } from './redisStore.ts';
import { ScriptValues } from './scriptValues.ts';
import { CLAIM_OUTBOX, RANGE_AFTER, UPDATE_INCIDENTS } from './scripts.ts';

/** The incident update script's first argument after the version and the payload: the stored values follow. */
const FIRST_UPDATE_VALUE_ARGUMENT = 3;

export interface RedisIncidentsOptions {
  readonly rules: IncidentRules;
  /** Key prefix; default `{wearshift}`. Keep a hash tag (braces) for Redis Cluster. */
  readonly prefix?: string;
  /** Partitions, as the worker's storage uses them. Default 1. */
  readonly partitions?: number;
  /** Compare-and-set attempts before an operation gives up under contention; default 25. */
  readonly maxAttempts?: number;
}

export interface ComponentRef {
  readonly unit: string;
  readonly component: string;
}

export interface StepsInput {
  readonly group: string;
  readonly now: Date;
  readonly quietBefore: Date;
}

export interface StoredStepsResult {
  readonly before: ComponentIncidents;
  readonly state: ComponentIncidents;
  readonly effects: readonly IncidentEffect[];
}

export interface DrainOptions {
  /** Effects handed over per call of the handler; default 100. */
  readonly batchSize?: number;
  /** A claimed batch whose handler neither finished nor failed within this time is handed out again; default 60 s. */
  readonly claimTimeoutMs?: number;
  /** Default: the system clock. */
  readonly now?: () => number;
}

/** The component an incident belongs to, from its id (`unit/component[/…]@sampleId`; names hold no "/"). */
export function ownerOf(incidentId: string): ComponentRef | undefined {
  const at = incidentId.indexOf('@');
  if (at <= 0) return undefined;
  const [unit, component] = incidentId.slice(0, at).split('/');
  return unit && component ? { unit, component } : undefined;
}

/** An incident of the list with its place in the order. */
/** Bounds of one page's reading (the HTTP API's; the command line reads without them). */
export interface PageOptions {
  /** Most incident records read looking for the page's matches; the page ends early after them. Default: no bound. */
  readonly examineAtMost?: number;
}

interface Listed {
  readonly position: ListPosition;
  readonly summary: IncidentSummary;
}

/** Byte order of the ids' UTF-8, as Redis orders the members of a sorted set that share a score. */
function compareIds(a: string, b: string): number {
  return Buffer.compare(Buffer.from(a, 'utf8'), Buffer.from(b, 'utf8'));
}

/** The list's order within each index, as the sorted sets give it: open ascending, closed its exact reverse. */
const ORDER: Record<ListIndex, (a: Listed, b: Listed) => number> = {
  open: (a, b) => a.position.key - b.position.key || compareIds(a.position.id, b.position.id),
  closed: (a, b) => b.position.key - a.position.key || compareIds(b.position.id, a.position.id),
};

/** Why an action on an open incident waits: the sample that opened it is about to be judged again. */
export const JUDGED_AGAIN = 'is being judged again with results that arrived before it (its sample waits for them); try again in a few seconds';
/** The Retry-After of that refusal, in seconds. */
export const JUDGED_AGAIN_RETRY_S = 5;

export class RedisIncidents {
  readonly partitions: Partitions;
  private readonly rules: IncidentRules;
  private readonly maxAttempts: number;

  constructor(
    private readonly redis: RedisConnection,
    options: RedisIncidentsOptions,
  ) {
    this.partitions = new Partitions(options.prefix, options.partitions ?? 1);
    this.rules = options.rules;
    this.maxAttempts = options.maxAttempts ?? 25;
  }

  private keysOf(ref: ComponentRef) {
    const tag = this.partitions.tag(this.partitions.of(ref));
    return { c: componentKeys(tag, ref), p: partitionKeys(tag) };
  }

  /** Feeds evaluation steps of one component (see applySteps); effects go to the outbox. For tools and tests. */
  async applySteps(ref: ComponentRef, steps: readonly (Step & Pick<IncidentStep, 'forecast'>)[], input: StepsInput): Promise<StoredStepsResult> {
    return this.update(ref, (before) => {
      const r = applySteps(before, steps, { ...input, rules: this.rules });
      return { ...r, before };
    });
  }

  /** An operator action (acknowledge, shelve, unshelve, resolve, note); errors name the field or the conflict. */
  async applyAction(action: IncidentAction): Promise<ActionResult> {
    const ref = ownerOf(action.incidentId);
    const onRecord = ref === undefined ? undefined : await this.get(action.incidentId);
    if (ref === undefined || onRecord === undefined) throw new IncidentNotFoundError(action.incidentId);
    return this.update(ref, (state) => {
      if (findIncident(state, action.incidentId) === undefined) {
        // An open one is out of the state only while the sample that opened it waits to be judged again (an
        // evaluation judged up to a month's end before it: incidentFold.ts, leftDue).
        if (onRecord.closed === null) throw new IncidentConflictError(action.incidentId, JUDGED_AGAIN, JUDGED_AGAIN_RETRY_S);
        // Else it is closed: a later one of the same key replaced it.
        throw new IncidentConflictError(action.incidentId, 'is closed and archived; its timeline is final');
      }
      return applyAction(state, action, this.rules);
    });
  }

  /**
   * A delayed escalation check; an incident the store does not know is a stale job and yields nothing. `later`: the
   * incident is open on record but out of the component's state while the sample that opened it waits to be judged
   * again (incidentFold.ts, leftDue); the check is to come again once it is back.
   */
  async applyEscalationCheck(check: EscalationCheck): Promise<{ effects: readonly IncidentEffect[]; later?: true }> {
    const ref = ownerOf(check.incidentId);
    if (ref === undefined) return { effects: [] };
    const r = await this.update(ref, async (state): Promise<{ state: ComponentIncidents; effects: readonly IncidentEffect[]; later?: true }> => {
      const waiting = findIncident(state, check.incidentId) === undefined && (await this.get(check.incidentId))?.closed === null;
      return waiting ? { state, effects: [], later: true } : applyEscalationCheck(state, check, this.rules);
    });
    return { effects: r.effects, ...(r.later && { later: true as const }) };
  }

  /**
   * A responder's word on a sample in doubt, in the timeline of every incident of the component that holds the sample
   * (sampleVerdict.ts); returns those incidents as they stand with it. Giving the same word again changes nothing.
   */
  async recordSampleVerdict(ref: ComponentRef, word: SampleVerdictWord): Promise<readonly Incident[]> {
    const result = await this.update(ref, async (state) => applySampleVerdict(state, await this.onRecord(ref), word, this.rules));
    return result.concerned;
  }

  /**
   * Judges a queued message on its incident as it stands (withdrawal.ts) and, when it no longer goes, records it as
   * withdrawn on the incident, in the same compare-and-set as every other change of the component's incidents.
   * Undefined when the message goes (or its incident is unknown); a message recorded as withdrawn before is
   * returned as such (`before`) and not recorded again. `attemptedAt`: an earlier attempt of the message ended without
   * the channel's answer then (withdrawal.ts).
   */
  async withdrawMessage(effect: NotifyEffect, now: Date, attemptedAt?: Date): Promise<MessageWithdrawal | undefined> {
    const ref = ownerOf(effect.incidentId);
    if (ref === undefined) return undefined;
    let outcome: MessageWithdrawal | undefined;
    await this.update(ref, async (state) => {
      const key = Object.keys(state.incidents).find((k) => state.incidents[k]!.id === effect.incidentId);
      // An incident no longer in the state (closed, then replaced or withdrawn) is judged and marked on its record.
      const incident = key !== undefined ? state.incidents[key]! : await this.get(effect.incidentId);
      outcome = incident === undefined ? undefined : withdrawMessage(incident, effect, now, attemptedAt);
      if (outcome === undefined || outcome.before) return { state, effects: [] };
      if (key === undefined) return { state, effects: [], archived: [outcome.incident] };
      return { state: { ...state, incidents: { ...state.incidents, [key]: outcome.incident } }, effects: [] };
    });
    return outcome;
  }

  async component(ref: ComponentRef): Promise<ComponentIncidents> {
    return (await this.read(ref)).state;
  }

  async get(incidentId: string): Promise<Incident | undefined> {
    const ref = ownerOf(incidentId);
    if (ref === undefined) return undefined;
    const raw = await this.redis.hgetBuffer(this.keysOf(ref).p.records, incidentId);
    return raw === null ? undefined : incidentOfRecord(raw);
  }

  /** Open incidents by severity (highest first), then newest first; closed ones newest closing first. */
  async list(filter: IncidentFilter): Promise<IncidentSummary[]> {
    return (await this.collect(filter, undefined, filter.limit)).listed.map((x) => x.summary);
  }

  /**
   * One page of the list: up to `filter.limit` incidents strictly after `after` (from the start without it) in the
   * list's order, where it ended when more match, and how many match in all when the indexes' sizes tell it. The
   * order is the indexes' (open: severity, then newest opened; closed: newest closing; ties by id), so a page
   * continues exactly where the last one ended: an incident opened meanwhile shows where the order places it, once
   * or (before the position) not at all, and displaces nothing. One whose severity or state changed meanwhile moves
   * to its new place in the order. With `options.examineAtMost`, a page whose reading ends on that bound holds the
   * matches up to the last record read and `next` continues after it (a page may then hold fewer than `limit`
   * incidents, none even, with `next` set).
   */
  async page(filter: IncidentFilter, after?: ListPosition, options: PageOptions = {}): Promise<IncidentPage> {
    const [found, indexTotal] = await Promise.all([this.collect(filter, after, filter.limit + 1, options.examineAtMost), this.countByIndexes(filter)]);
    const shown = found.listed.slice(0, filter.limit);
    const more = found.listed.length > filter.limit;
    const last = shown[shown.length - 1];
    // A first page that holds every match has counted them too.
    const total = indexTotal ?? (after === undefined && !more && found.stoppedAt === undefined ? shown.length : null);
    // A page cut short by the reading budget continues after the last record read, matching or not.
    const next = more && last !== undefined ? last.position : (found.stoppedAt ?? null);
    return { incidents: shown.map((x) => x.summary), next, total };
  }

  /**
   * How many incidents `filter` matches in all, whatever its limit, so that a list cut at the limit can say so. A filter
   * by open or closed alone is answered by the sizes of the indexes (ZCARD); a narrower one (a state within the open
   * ones, severity, unit, group) reads the records of the indexes it needs, a page at a time.
   */
  async count(filter: IncidentFilter): Promise<number> {
    const byIndexes = await this.countByIndexes(filter);
    if (byIndexes !== undefined) return byIndexes;
    const counts = await Promise.all(
      this.partitions.all().flatMap((n) => {
        const p = partitionKeys(this.partitions.tag(n));
        return listIndexes(filter).map((index) => this.countMatching(p.records, p[index], filter));
      }),
    );
    return counts.reduce((a, b) => a + b, 0);
  }

  /** How many incidents a filter by open, closed or all alone matches (ZCARD of its indexes); undefined for a narrower one. */
  private async countByIndexes(filter: IncidentFilter): Promise<number | undefined> {
    const byIndexAlone = filter.severity === undefined && filter.unit === undefined && filter.group === undefined && ['open', 'closed', 'all'].includes(filter.state);
    if (!byIndexAlone) return undefined;
    const counts = await Promise.all(
      this.partitions.all().flatMap((n) => {
        const p = partitionKeys(this.partitions.tag(n));
        return listIndexes(filter).map((index) => this.redis.zcard(p[index]));
      }),
    );
    return counts.reduce((a, b) => a + b, 0);
  }

  private async countMatching(records: string, zset: string, filter: IncidentFilter): Promise<number> {
    const page = 500;
    let matching = 0;
    for (let start = 0; ; start += page) {
      const ids = await this.redis.zrange(zset, start, start + page - 1);
      if (ids.length === 0) break;
      for (const raw of await this.redis.hmgetBuffer(records, ...ids)) if (raw !== null && matchesFilter(summarize(incidentOfRecord(raw)), filter)) matching += 1;
      if (ids.length < page) break;
    }
    return matching;
  }

  /**
   * Hands the outbox of every partition to `handler` in batches until it is empty; returns how many effects were
   * handed over. An effect leaves the outbox only after its handler resolved; a failed or interrupted batch is handed
   * out again (after the claim timeout), so the handler must be idempotent — effect keys make that easy.
   */
  async drainOutbox(handler: (effects: IncidentEffect[]) => Promise<void>, options: DrainOptions = {}): Promise<number> {
    const batchSize = options.batchSize ?? 100;
    const claimTimeoutMs = options.claimTimeoutMs ?? 60_000;
    const now = options.now ?? Date.now;
    let handed = 0;
    for (const n of this.partitions.all()) {
      const p = partitionKeys(this.partitions.tag(n));
      for (;;) {
        const t = now();
        const raw = (await this.redis.eval(CLAIM_OUTBOX, 2, p.outbox, p.outboxClaimed, String(t), String(batchSize), String(t - claimTimeoutMs))) as string[];
        if (raw.length === 0) break;
        await handler(raw.map((r) => JSON.parse(r) as IncidentEffect));
        await this.redis.zrem(p.outboxClaimed, ...raw);
        handed += raw.length;
      }
    }
    return handed;
  }

  /** Effects waiting in the outboxes, and claimed ones not yet confirmed. */
  async outboxSize(): Promise<{ waiting: number; claimed: number }> {
    const sizes = await Promise.all(
      this.partitions.all().map(async (n) => {
        const p = partitionKeys(this.partitions.tag(n));
        return [await this.redis.llen(p.outbox), await this.redis.zcard(p.outboxClaimed)] as const;
      }),
    );
    return { waiting: sizes.reduce((a, [w]) => a + w, 0), claimed: sizes.reduce((a, [, c]) => a + c, 0) };
  }

  /**
   * Up to `want` incidents matching `filter` strictly after `after`, in the list's order: the open index, then (for
   * closed and all) the closed one, each read from every partition and merged. With `examineAtMost`, the records read
   * are bounded (shared out between the partitions): when the bound ends the reading before `want` matches were found,
   * `stoppedAt` is the position up to which every partition was read, and `listed` holds the matches up to it only.
   */
  private async collect(filter: IncidentFilter, after: ListPosition | undefined, want: number, examineAtMost = Infinity): Promise<{ listed: Listed[]; stoppedAt?: ListPosition }> {
    const out: Listed[] = [];
    const indexes = listIndexes(filter);
    const partitions = this.partitions.all();
    let budget = examineAtMost;
    for (const index of indexes.slice(after === undefined ? 0 : Math.max(0, indexes.indexOf(after.index)))) {
      if (out.length >= want) break;
      const from = after?.index === index ? after : undefined;
      const share = Math.max(1, Math.ceil(budget / partitions.length));
      const scans = await Promise.all(partitions.map((n) => this.scan(n, index, from, filter, want - out.length, share)));
      budget -= scans.reduce((a, x) => a + x.examined, 0);
      // Every partition is read up to the earliest position where one stopped on the budget; matches beyond it wait
      // for the next page, so that none is skipped.
      const order = (a: ListPosition, b: ListPosition) => ORDER[index]({ position: a } as Listed, { position: b } as Listed);
      const stoppedAt = scans.flatMap((x) => (x.stoppedAt === undefined ? [] : [x.stoppedAt])).sort(order)[0];
      const merged = scans.flatMap((x) => x.listed).sort(ORDER[index]);
      const within = stoppedAt === undefined ? merged : merged.filter((x) => order(x.position, stoppedAt) <= 0);
      out.push(...within.slice(0, want - out.length));
      if (stoppedAt !== undefined && out.length < want) return { listed: out, stoppedAt };
    }
    return { listed: out };
  }

  /**
   * Up to `want` matching incidents of one partition's index, in its order, strictly after `from` if given, reading at
   * most `examineAtMost` records: `stoppedAt` is the last one read when that bound ended the reading first.
   */
  private async scan(n: number, index: ListIndex, from: ListPosition | undefined, filter: IncidentFilter, want: number, examineAtMost: number): Promise<{ listed: Listed[]; examined: number; stoppedAt?: ListPosition }> {
    const p = partitionKeys(this.partitions.tag(n));
    const zset = p[index];
    const reverse = index === 'closed';
    const out: Listed[] = [];
    let examined = 0;
    let position = from;
    while (out.length < want) {
      if (examined >= examineAtMost) return { listed: out, examined, ...(position !== undefined && { stoppedAt: position }) };
      const batch = Math.min(200, examineAtMost - examined);
      // Each batch continues after the last entry read, whatever changed in the index meanwhile.
      const flat = (
        position === undefined
          ? reverse
            ? await this.redis.zrevrange(zset, 0, batch - 1, 'WITHSCORES')
            : await this.redis.zrange(zset, 0, batch - 1, 'WITHSCORES')
          : await this.redis.eval(RANGE_AFTER, 1, zset, String(position.key), position.id, String(batch), reverse ? '1' : '0')
      ) as string[];
      if (flat.length === 0) break;
      const entries: ListPosition[] = [];
      for (let i = 0; i < flat.length; i += 2) entries.push({ index, id: flat[i]!, key: Number(flat[i + 1]) });
      const records = await this.redis.hmgetBuffer(p.records, ...entries.map((e) => e.id));
      for (let i = 0; i < records.length && out.length < want; i++) {
        examined += 1;
        position = entries[i];
        const raw = records[i];
        if (raw === null || raw === undefined) continue;
        const summary = summarize(incidentOfRecord(raw));
        if (matchesFilter(summary, filter)) out.push({ position: entries[i]!, summary });
      }
      if (entries.length < batch) break;
    }
    return { listed: out, examined };
  }

  /** The component's incidents on record, the closed ones no longer in its state among them. */
  private async onRecord(ref: ComponentRef): Promise<Incident[]> {
    const { c, p } = this.keysOf(ref);
    const ids = await this.redis.zrange(c.incidents, 0, -1);
    if (ids.length === 0) return [];
    return (await this.redis.hmgetBuffer(p.records, ...ids)).filter((r): r is Buffer => r !== null).map(incidentOfRecord);
  }

  private async read(ref: ComponentRef): Promise<{ version: string; state: ComponentIncidents }> {
    const [version, raw] = await this.redis.hmgetBuffer(this.keysOf(ref).c.evaluation, 'version', 'incidents');
    return { version: version?.toString('utf8') ?? '0', state: raw === null || raw === undefined ? emptyComponentIncidents(ref.unit, ref.component) : (JSON.parse(expandValue(raw)) as ComponentIncidents) };
  }

  private async update<R extends { state: ComponentIncidents; effects: readonly IncidentEffect[]; archived?: readonly Incident[] }>(
    ref: ComponentRef,
    operate: (state: ComponentIncidents) => R | Promise<R>,
  ): Promise<R> {
    const { c, p } = this.keysOf(ref);
    for (let attempt = 1; ; attempt++) {
      // Whatever `operate` reads besides the state (records) is covered too: every write of them changes the version.
      const { version, state } = await this.read(ref);
      const result = await operate(state);
      const changed = [...changedIncidents(state, result.state), ...(result.archived ?? [])];
      if (changed.length === 0 && result.effects.length === 0 && JSON.stringify(state) === JSON.stringify(result.state)) return result;
      // The state and the records go as arguments of their own after the version and the payload, which names them
      // (scripts.ts, UPDATE_INCIDENTS).
      const values = new ScriptValues(FIRST_UPDATE_VALUE_ARGUMENT);
      const payload = {
        state: values.add(compactValue(JSON.stringify(result.state))),
        records: incidentRecordRows(changed, values),
        outbox: result.effects.map((e) => JSON.stringify(e)),
      };
      const committed = await this.redis.eval(UPDATE_INCIDENTS, 6, c.evaluation, p.records, p.open, p.closed, p.outbox, c.incidents, version, JSON.stringify(payload), ...values.values);
      if (committed === 1) return result;
      if (attempt >= this.maxAttempts) throw new Error(`incidents of ${ref.unit}/${ref.component}: gave up after ${attempt} concurrent updates`);
      await new Promise((r) => setTimeout(r, Math.random() * Math.min(50, 2 ** attempt)));
    }
  }
}

