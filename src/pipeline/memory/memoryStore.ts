/**
 * Storage in process memory, for replay, backtest and tests: the same contract and the same decisions as the Redis
 * storage (src/redis), without a server; one partition holding every component and group. Not shared between
 * processes.
 */
import { randomUUID } from 'node:crypto';
import type { GroupStats, SampleMark } from '../../analysis/model.ts';
import { componentKey, type Sample } from '../../domain/event.ts';
import type { Measurand } from '../../domain/measurands.ts';
import { resolveSettings } from '../../domain/settings.ts';
import { ConfigSchema, type Config } from '../../domain/config.ts';
import { emptyComponentIncidents, type ComponentIncidents, type Incident, type IncidentEffect, type StepPosition } from '../../incidents/model.ts';
import { comparePosition, positionOf } from '../../incidents/verdict.ts';
import type { IncidentRules } from '../../incidents/policy.ts';
import { applySampleVerdict, type SampleVerdictWord } from '../../incidents/sampleVerdict.ts';
import { canonicalSampleJson } from '../canonicalSample.ts';
import { incidentChanges, type IncidentChange } from '../incidentChanges.ts';
import {
  addBaseline,
  addPopulation,
  baselineBucketOf,
  combineBuckets,
  groupStatsOf,
  type BaselineBucket,
  type MonthBucket,
  type PopulationCell,
} from '../groupShares.ts';
import type {
  BaselineShare,
  Checkpoint,
  CommitOutcome,
  ComponentEntry,
  ComponentRef,
  ComponentStore,
  EvaluationCommit,
  EvaluationInput,
  GroupLedger,
  Lease,
  SampleShare,
  SharesCommit,
  SharesOutcome,
  StepRecord,
  StoredSample,
  StoreOutcome,
  WordGiven,
} from '../ports.ts';

interface ComponentState {
  unit: string;
  component: string;
  group: string;
  /** `${sampleId}\u001f${revision}` → canonical JSON and arrival. */
  revisions: Map<string, { json: string; receivedAt: number }>;
  /** sampleId → the revision in force. */
  winners: Map<string, { revision: number; position: StepPosition }>;
  mark: number;
  evaluated: number;
  dirtyFrom?: StepPosition;
  /** The earliest position changed since the last input read under the lock (left due by a commit that does not cover it). */
  dirtyLater?: StepPosition;
  latest?: string;
  sparse: Map<number, string>;
  marks: Map<string, SampleMark>;
  wordsGiven: Map<string, WordGiven>;
  steps: Map<string, StepRecord & { time: number }>;
  shares: Map<string, SampleShare>;
  baselines: Partial<Record<Measurand, BaselineShare>>;
  incidents: string;
  incidentsVersion: number;
}

interface MutableBucket {
  population: Record<string, PopulationCell>;
  baselines: Partial<Record<Measurand, BaselineBucket>>;
}

interface GroupState {
  months: Map<string, MutableBucket>;
  horizons: Map<string, { ref: ComponentRef; time: number }>;
}

export interface MemoryStoreOptions {
  /** Steps with findings kept per component (the oldest go first). Default 1000, as in Redis. */
  findingsLogLimit?: number;
  /** Clock for lock expiry. Default `Date.now`. */
  now?: () => number;
  /** The configuration, for the population method of each group (percentile keeps values). Default: sigma everywhere. */
  config?: Config;
}

export class MemoryStore implements ComponentStore, GroupLedger {
  private readonly byKey = new Map<string, ComponentState>();
  private readonly groups = new Map<string, GroupState>();
  private readonly locks = new Map<string, { token: string; expires: number }>();
  private readonly records = new Map<string, Incident>();
  private readonly outboxList: IncidentEffect[] = [];
  private readonly findingsLogLimit: number;
  private readonly now: () => number;
  private readonly config: Config | undefined;

  constructor(options: MemoryStoreOptions = {}) {
    this.findingsLogLimit = options.findingsLogLimit ?? 1000;
    this.now = options.now ?? Date.now;
    this.config = options.config;
  }

  async store(sample: Sample, group: string, receivedAt: number): Promise<StoreOutcome> {
    const key = componentKey(sample);
    let c = this.byKey.get(key);
    if (c === undefined) {
      c = {
        unit: sample.unit,
        component: sample.component,
        group,
        revisions: new Map(),
        winners: new Map(),
        mark: 0,
        evaluated: 0,
        sparse: new Map(),
        marks: new Map(),
        wordsGiven: new Map(),
        steps: new Map(),
        shares: new Map(),
        baselines: {},
        incidents: JSON.stringify(emptyComponentIncidents(sample.unit, sample.component)),
        incidentsVersion: 0,
      };
      this.byKey.set(key, c);
    }
    const revisionKey = `${sample.sampleId}\u001f${sample.revision}`;
    const json = canonicalSampleJson(sample);
    const stored = c.revisions.get(revisionKey);
    if (stored !== undefined) return { status: stored.json === json ? 'duplicate' : 'conflict', evaluationDue: c.mark > c.evaluated };
    c.revisions.set(revisionKey, { json, receivedAt });
    const winner = c.winners.get(sample.sampleId);
    let status: StoreOutcome['status'];
    if (winner !== undefined && sample.revision < winner.revision) {
      status = 'superseded';
    } else {
      status = winner === undefined ? 'new' : 'replacement';
      const position = positionOf(sample);
      c.winners.set(sample.sampleId, { revision: sample.revision, position });
      c.group = group;
      dirty(c, winner !== undefined && comparePosition(winner.position, position) < 0 ? winner.position : position);
    }
    c.mark += 1;
    return { status, evaluationDue: c.mark > c.evaluated };
  }

  async storeMany(items: readonly { readonly sample: Sample; readonly group: string }[], receivedAt: number): Promise<StoreOutcome[]> {
    const out: StoreOutcome[] = [];
    for (const { sample, group } of items) out.push(await this.store(sample, group, receivedAt));
    return out;
  }

  async component(ref: ComponentRef): Promise<ComponentEntry | undefined> {
    const c = this.byKey.get(componentKey(ref));
    return c && entryOf(c);
  }

  async components(): Promise<ComponentEntry[]> {
    return [...this.byKey.keys()].sort().map((k) => entryOf(this.byKey.get(k)!));
  }

  async revisions(ref: ComponentRef): Promise<StoredSample[]> {
    const c = this.byKey.get(componentKey(ref));
    return c === undefined ? [] : [...c.revisions.values()].map((r) => ({ sample: JSON.parse(r.json) as Sample, receivedAt: r.receivedAt }));
  }

  async samplesAfter(ref: ComponentRef, position: StepPosition | null): Promise<StoredSample[]> {
    const c = this.byKey.get(componentKey(ref));
    if (c === undefined) return [];
    const out: Array<StoredSample & { position: StepPosition }> = [];
    for (const [sampleId, w] of c.winners) {
      if (position !== null && comparePosition(w.position, position) <= 0) continue;
      const r = c.revisions.get(`${sampleId}\u001f${w.revision}`)!;
      out.push({ sample: JSON.parse(r.json) as Sample, receivedAt: r.receivedAt, position: w.position });
    }
    return out.sort((a, b) => comparePosition(a.position, b.position)).map(({ position: _p, ...s }) => s);
  }

  async evaluationInput(ref: ComponentRef): Promise<EvaluationInput | undefined> {
    const c = this.byKey.get(componentKey(ref));
    if (c === undefined || c.winners.size === 0) return undefined;
    return {
      entry: entryOf(c),
      mark: c.mark,
      ...(c.dirtyFrom !== undefined && { dirtyFrom: c.dirtyFrom }),
      ...(c.latest !== undefined && { latest: JSON.parse(c.latest) as Checkpoint }),
      marks: new Map(c.marks),
      incidents: JSON.parse(c.incidents) as ComponentIncidents,
      incidentsVersion: c.incidentsVersion,
    };
  }

  async checkpointBefore(ref: ComponentRef, position: StepPosition): Promise<Checkpoint | undefined> {
    return this.latestCheckpointWhere(ref, (cp) => comparePosition(cp.position!, position) < 0);
  }

  async checkpointAtMost(ref: ComponentRef, count: number): Promise<Checkpoint | undefined> {
    return this.latestCheckpointWhere(ref, (cp) => cp.count <= count);
  }

  /** The sparse checkpoint with the highest count among those `accept` takes. */
  private latestCheckpointWhere(ref: ComponentRef, accept: (cp: Checkpoint) => boolean): Checkpoint | undefined {
    const c = this.byKey.get(componentKey(ref));
    if (c === undefined) return undefined;
    let best: Checkpoint | undefined;
    for (const json of c.sparse.values()) {
      const cp = JSON.parse(json) as Checkpoint;
      if (cp.position === null || !accept(cp)) continue;
      if (best === undefined || cp.count > best.count) best = cp;
    }
    return best;
  }

  async acquire(ref: ComponentRef, ttlMs: number): Promise<Lease | undefined> {
    const key = componentKey(ref);
    const held = this.locks.get(key);
    if (held !== undefined && held.expires > this.now()) return undefined;
    const token = randomUUID();
    this.locks.set(key, { token, expires: this.now() + ttlMs });
    return { key, token };
  }

  async acquireWithInput(ref: ComponentRef, ttlMs: number): Promise<{ lease: Lease; input: EvaluationInput | undefined } | undefined> {
    const lease = await this.acquire(ref, ttlMs);
    if (lease === undefined) return undefined;
    const input = await this.evaluationInput(ref);
    const c = this.byKey.get(componentKey(ref));
    if (c !== undefined) delete c.dirtyLater;
    return { lease, input };
  }

  async renew(lease: Lease, ttlMs: number): Promise<boolean> {
    const held = this.locks.get(lease.key);
    if (held?.token !== lease.token) return false;
    held.expires = this.now() + ttlMs;
    return true;
  }

  async release(lease: Lease): Promise<void> {
    if (this.locks.get(lease.key)?.token === lease.token) this.locks.delete(lease.key);
  }

  async commit(ref: ComponentRef, lease: Lease, commit: EvaluationCommit): Promise<CommitOutcome> {
    if (this.locks.get(lease.key)?.token !== lease.token) return { ok: false, reason: 'lost-lock' };
    const c = this.byKey.get(componentKey(ref));
    if (c === undefined) return { ok: false, reason: 'lost-lock' };
    if (c.incidentsVersion !== commit.incidentsVersion) return { ok: false, reason: 'incidents-changed' };
    // A commit that leaves read samples due does not count as covering the changes: a result stored again is still due.
    if (commit.dueFrom === undefined) c.evaluated = Math.max(c.evaluated, commit.mark);
    const settled = c.mark === commit.mark && commit.dueFrom === undefined;
    const later = commit.dueFrom !== undefined && (c.dirtyLater === undefined || comparePosition(commit.dueFrom, c.dirtyLater) < 0) ? commit.dueFrom : c.dirtyLater;
    if (settled) delete c.dirtyFrom;
    else if (later !== undefined) c.dirtyFrom = later;
    delete c.dirtyLater;
    c.latest = JSON.stringify(commit.latest);
    if (commit.rewoundTo !== undefined) {
      for (const [count, json] of c.sparse) {
        const cp = JSON.parse(json) as Checkpoint;
        if (commit.rewoundTo === null || cp.position === null || comparePosition(cp.position, commit.rewoundTo) > 0) c.sparse.delete(count);
      }
    }
    for (const cp of commit.sparse) c.sparse.set(cp.count, JSON.stringify(cp));
    thinCheckpoints(c.sparse);
    for (const step of commit.steps) {
      if (step.findings.length === 0 && step.status === undefined) c.steps.delete(step.sampleId);
      else c.steps.set(step.sampleId, { ...step, time: Date.parse(step.sampledAt) });
    }
    const kept = [...c.steps.values()].sort(byTimeThenId);
    for (const old of kept.slice(0, Math.max(0, kept.length - this.findingsLogLimit))) c.steps.delete(old.sampleId);
    const changed = this.applyShares(c, commit);
    c.incidents = JSON.stringify(commit.incidents);
    c.incidentsVersion += 1;
    for (const inc of [...Object.values(commit.incidents.incidents), ...commit.archived, ...commit.withdrawn]) this.records.set(inc.id, structuredClone(inc));
    this.outboxList.push(...commit.effects);
    this.advanceHorizon(ref, c.group, commit.horizon);
    if (settled && commit.releaseWhenSettled === true) this.locks.delete(lease.key);
    return { ok: true, settled, ...(changed !== undefined && { changedMonth: changed }) };
  }

  async commitShares(ref: ComponentRef, lease: Lease, commit: SharesCommit): Promise<SharesOutcome> {
    if (this.locks.get(lease.key)?.token !== lease.token) return { ok: false, reason: 'lost-lock' };
    const c = this.byKey.get(componentKey(ref));
    if (c === undefined) return { ok: false, reason: 'lost-lock' };
    const changed = this.applyShares(c, commit);
    this.advanceHorizon(ref, c.group, commit.horizon);
    return { ok: true, ...(changed !== undefined && { changedMonth: changed }) };
  }

  private advanceHorizon(ref: ComponentRef, group: string, horizon: number): void {
    const horizons = this.group(group).horizons;
    horizons.set(componentKey(ref), { ref: { unit: ref.unit, component: ref.component }, time: Math.max(horizons.get(componentKey(ref))?.time ?? 0, horizon) });
  }

  /** Moves the component's shares of its group's month buckets to those of the commit; the earliest month changed. */
  private applyShares(c: ComponentState, commit: SharesCommit): string | undefined {
    let changed: string | undefined;
    const touch = (month: string) => {
      if (changed === undefined || month < changed) changed = month;
    };
    if (c.group !== commit.group) this.moveGroup(c, commit.group);
    const keepValues = this.keepValues(c);
    for (const share of commit.shares) {
      const old = c.shares.get(share.sampleId);
      if (old !== undefined && old.month === share.month && JSON.stringify(old.values) === JSON.stringify(share.values)) continue;
      if (old?.values) {
        addPopulation(this.bucket(c.group, old.month).population, old.values, -1, keepValues);
        touch(old.month);
      }
      if (share.values) {
        addPopulation(this.bucket(c.group, share.month).population, share.values, 1, keepValues);
        touch(share.month);
      }
      c.shares.set(share.sampleId, share);
    }
    for (const m of new Set([...Object.keys(c.baselines), ...Object.keys(commit.baselines)]) as Set<Measurand>) {
      const old = c.baselines[m];
      const next = commit.baselines[m];
      if (JSON.stringify(old) === JSON.stringify(next)) continue;
      const oldEntry = old && baselineBucketOf(old.sums);
      if (old && oldEntry) {
        const b = this.bucket(c.group, old.month);
        const left = addBaseline(b.baselines[m], oldEntry, -1);
        if (left === undefined) delete b.baselines[m];
        else b.baselines[m] = left;
        touch(old.month);
      }
      const newEntry = next && baselineBucketOf(next.sums);
      if (next && newEntry) {
        const b = this.bucket(c.group, next.month);
        b.baselines[m] = addBaseline(b.baselines[m], newEntry, 1)!;
        touch(next.month);
      }
      if (next) c.baselines[m] = next;
      else delete c.baselines[m];
    }
    return changed;
  }

  async markDirty(marks: readonly { readonly ref: ComponentRef; readonly from: StepPosition }[]): Promise<void> {
    for (const { ref, from } of marks) {
      const c = this.byKey.get(componentKey(ref));
      if (c === undefined) continue;
      dirty(c, from);
      c.mark += 1;
    }
  }

  async markSample(ref: ComponentRef, sampleId: string, mark: SampleMark | null, given?: WordGiven): Promise<boolean> {
    const c = this.byKey.get(componentKey(ref));
    const w = c?.winners.get(sampleId);
    if (c === undefined || w === undefined) return false;
    if (mark === null) c.marks.delete(sampleId);
    else c.marks.set(sampleId, mark);
    if (mark === null || given === undefined) c.wordsGiven.delete(sampleId);
    else c.wordsGiven.set(sampleId, given);
    dirty(c, w.position);
    c.mark += 1;
    return true;
  }

  async wordsGiven(ref: ComponentRef): Promise<Map<string, WordGiven>> {
    return new Map(this.byKey.get(componentKey(ref))?.wordsGiven);
  }

  async findings(ref: ComponentRef): Promise<StepRecord[]> {
    const c = this.byKey.get(componentKey(ref));
    return c === undefined ? [] : [...c.steps.values()].sort(byTimeThenId).map(({ time: _time, ...step }) => step);
  }

  async incidentsOpenedAfter(ref: ComponentRef, position: StepPosition | null, before?: StepPosition): Promise<Incident[]> {
    const out: Incident[] = [];
    for (const inc of this.records.values()) {
      if (inc.unit !== ref.unit || inc.component !== ref.component) continue;
      const opened = { sampleId: inc.openedBySampleId, time: Date.parse(inc.openedAt), ...openedUnitHours(this.byKey.get(componentKey(ref)), inc.openedBySampleId) };
      if ((position === null || comparePosition(opened, position) > 0) && (before === undefined || comparePosition(opened, before) < 0)) out.push(structuredClone(inc));
    }
    return out;
  }

  // The group ledger.

  async asOf(group: string, month: string, self: ComponentRef): Promise<GroupStats> {
    const g = this.groups.get(group);
    const c = this.byKey.get(componentKey(self));
    const settings = resolveSettings(this.config ?? DEFAULT_CONFIG, { unit: self.unit, component: self.component, group });
    const keepValues = settings.population.method === 'percentile';
    const parts: Array<readonly [MonthBucket, 1 | -1]> = [];
    for (const [m, bucket] of g?.months ?? []) if (m < month) parts.push([bucket, 1]);
    if (c !== undefined && c.group === group) for (const [m, bucket] of ownBuckets(c)) if (m < month) parts.push([bucket, -1]);
    return groupStatsOf(group, combineBuckets(parts, keepValues), settings);
  }

  async asOfMonths(group: string, months: readonly string[], self: ComponentRef): Promise<Map<string, GroupStats>> {
    const out = new Map<string, GroupStats>();
    for (const month of new Set(months)) out.set(month, await this.asOf(group, month, self));
    return out;
  }

  async touch(group: string, self: ComponentRef, horizon: number): Promise<void> {
    const h = this.group(group).horizons;
    const key = componentKey(self);
    h.set(key, { ref: { unit: self.unit, component: self.component }, time: Math.max(h.get(key)?.time ?? 0, horizon) });
  }

  async membersAfter(group: string, from: number): Promise<ComponentRef[]> {
    return [...(this.groups.get(group)?.horizons.values() ?? [])].filter((h) => h.time >= from).map((h) => h.ref);
  }

  async othersIn(group: string, self: ComponentRef): Promise<number> {
    const h = this.groups.get(group)?.horizons;
    return h === undefined ? 0 : h.size - (h.has(componentKey(self)) ? 1 : 0);
  }

  /**
   * A responder's word on a sample in the timelines of the component's incidents that hold the sample, as the Redis
   * incident store records it (RedisIncidents `recordSampleVerdict`); returns what that changed in their timelines.
   */
  async recordSampleVerdict(ref: ComponentRef, word: SampleVerdictWord, rules: IncidentRules): Promise<IncidentChange[]> {
    const c = this.byKey.get(componentKey(ref));
    if (c === undefined) return [];
    const before = JSON.parse(c.incidents) as ComponentIncidents;
    const onRecord = [...this.records.values()].filter((i) => i.unit === ref.unit && i.component === ref.component);
    const result = applySampleVerdict(before, onRecord, word, rules);
    c.incidents = JSON.stringify(result.state);
    c.incidentsVersion += 1;
    for (const inc of [...Object.values(result.state.incidents), ...result.archived]) this.records.set(inc.id, structuredClone(inc));
    this.outboxList.push(...result.effects);
    // The records outside the state count as they were, so that only the entry the word added is reported of them.
    const known = { ...before, incidents: { ...Object.fromEntries(onRecord.map((i) => [`record ${i.id}`, i])), ...before.incidents } };
    return incidentChanges(known, result.state, result.archived);
  }

  /** Every incident ever recorded (closed and withdrawn ones too), by id. */
  incidents(): Incident[] {
    return [...this.records.values()].sort((a, b) => (a.id < b.id ? -1 : a.id > b.id ? 1 : 0));
  }

  /** The messages the annunciation asked for, in order. */
  outbox(): readonly IncidentEffect[] {
    return this.outboxList;
  }

  private group(name: string): GroupState {
    let g = this.groups.get(name);
    if (g === undefined) this.groups.set(name, (g = { months: new Map(), horizons: new Map() }));
    return g;
  }

  private bucket(group: string, month: string): MutableBucket {
    const g = this.group(group);
    let b = g.months.get(month);
    if (b === undefined) g.months.set(month, (b = { population: {}, baselines: {} }));
    return b;
  }

  private keepValues(c: ComponentState): boolean {
    return resolveSettings(this.config ?? DEFAULT_CONFIG, { unit: c.unit, component: c.component, group: c.group }).population.method === 'percentile';
  }

  /** A component that changed group takes its shares along. */
  private moveGroup(c: ComponentState, to: string): void {
    const keepValues = this.keepValues(c);
    for (const share of c.shares.values()) {
      if (!share.values) continue;
      addPopulation(this.bucket(c.group, share.month).population, share.values, -1, keepValues);
      addPopulation(this.bucket(to, share.month).population, share.values, 1, keepValues);
    }
    for (const [m, share] of Object.entries(c.baselines) as [Measurand, BaselineShare][]) {
      const entry = baselineBucketOf(share.sums);
      if (entry === null) continue;
      const from = this.bucket(c.group, share.month);
      const left = addBaseline(from.baselines[m], entry, -1);
      if (left === undefined) delete from.baselines[m];
      else from.baselines[m] = left;
      const into = this.bucket(to, share.month);
      into.baselines[m] = addBaseline(into.baselines[m], entry, 1)!;
    }
    this.group(c.group).horizons.delete(componentKey(c));
    c.group = to;
  }
}

const DEFAULT_CONFIG: Config = ConfigSchema.parse({});

/** The component's own shares as month buckets. */
function ownBuckets(c: ComponentState): Map<string, MonthBucket> {
  const out = new Map<string, MutableBucket>();
  const bucket = (month: string) => {
    let b = out.get(month);
    if (b === undefined) out.set(month, (b = { population: {}, baselines: {} }));
    return b;
  };
  for (const share of c.shares.values()) if (share.values) addPopulation(bucket(share.month).population, share.values, 1, false);
  for (const [m, share] of Object.entries(c.baselines) as [Measurand, BaselineShare][]) {
    const entry = baselineBucketOf(share.sums);
    if (entry) bucket(share.month).baselines[m] = addBaseline(bucket(share.month).baselines[m], entry, 1)!;
  }
  return out;
}

/** The unit hours of the sample that opened an incident, for its position in the history. */
function openedUnitHours(c: ComponentState | undefined, sampleId: string): { unitHours?: number } {
  const h = c?.winners.get(sampleId)?.position.unitHours;
  return h === undefined ? {} : { unitHours: h };
}

function dirty(c: ComponentState, at: StepPosition): void {
  if (c.dirtyFrom === undefined || comparePosition(at, c.dirtyFrom) < 0) c.dirtyFrom = at;
  if (c.dirtyLater === undefined || comparePosition(at, c.dirtyLater) < 0) c.dirtyLater = at;
}

/**
 * Sparse checkpoints kept: the four latest, and of the older ones those at every eighth step of the spacing, at most
 * four. A result older than the oldest kept checkpoint folds the history from its start.
 */
function thinCheckpoints(sparse: Map<number, string>): void {
  const counts = [...sparse.keys()].sort((a, b) => b - a);
  const recent = new Set(counts.slice(0, 4));
  const spacing = counts.length >= 2 ? Math.abs(counts[0]! - counts[1]!) : 0;
  const older = counts.filter((n) => !recent.has(n) && spacing > 0 && n % (spacing * 8) === 0).slice(0, 4);
  const keep = new Set([...recent, ...older]);
  for (const n of counts) if (!keep.has(n)) sparse.delete(n);
}

function entryOf(c: ComponentState): ComponentEntry {
  let last = -Infinity;
  for (const w of c.winners.values()) last = Math.max(last, w.position.time);
  return { unit: c.unit, component: c.component, group: c.group, samples: c.winners.size, lastSampledAt: new Date(last).toISOString() };
}

function byTimeThenId(a: { time: number; sampleId: string }, b: { time: number; sampleId: string }): number {
  return a.time - b.time || (a.sampleId < b.sampleId ? -1 : a.sampleId > b.sampleId ? 1 : 0);
}
