/**
 * Storage in process memory, for `wearshift replay` and tests: the same contract and the same decisions as
 * the Redis storage (see redisStorage.ts), without a server. Not shared between processes.
 */
import { randomUUID } from 'node:crypto';
import { componentKey, type Sample } from '../domain/event.ts';
import type { Measurand } from '../domain/measurands.ts';
import { canonicalSampleJson, sampleMember } from './canonical.ts';
import type { BandContribution, BandSums } from './populationSums.ts';
import type {
  ComponentBaselines,
  ComponentEntry,
  ComponentRef,
  EvaluationCommit,
  FedPosition,
  Lease,
  Placement,
  PopulationSums,
  StepRecord,
  Storage,
  StoreOutcome,
} from './storage.ts';

interface ComponentState {
  unit: string;
  component: string;
  group: string;
  /** `${sampleId}\u001f${revision}` → canonical JSON. */
  revisions: Map<string, string>;
  /** sampleId → the revision in force and its time. */
  winners: Map<string, { revision: number; time: number; placement: Placement }>;
  mark: number;
  evaluated: number;
  fed?: FedPosition;
  steps: Map<string, StepRecord & { time: number }>;
}

interface MutableBand {
  n: number;
  sum: number;
  sumSq: number;
  values: Map<string, number>;
}

export interface MemoryStorageOptions {
  /** Steps with findings kept per component (the oldest go first). Default 1000, as in Redis. */
  findingsLogLimit?: number;
  /** Clock for lock expiry. Default `Date.now`. */
  now?: () => number;
}

export class MemoryStorage implements Storage {
  private readonly componentsByKey = new Map<string, ComponentState>();
  private readonly bands = new Map<string, Map<Measurand, Map<number, MutableBand>>>();
  private readonly baselinesByGroup = new Map<string, Map<string, ComponentBaselines>>();
  private readonly locks = new Map<string, { token: string; expires: number }>();
  private readonly findingsLogLimit: number;
  private readonly now: () => number;

  constructor(options: MemoryStorageOptions = {}) {
    this.findingsLogLimit = options.findingsLogLimit ?? 1000;
    this.now = options.now ?? Date.now;
  }

  async store(sample: Sample, placement: Placement): Promise<StoreOutcome> {
    const key = componentKey(sample);
    let c = this.componentsByKey.get(key);
    if (c === undefined) {
      c = { unit: sample.unit, component: sample.component, group: placement.group, revisions: new Map(), winners: new Map(), mark: 0, evaluated: 0, steps: new Map() };
      this.componentsByKey.set(key, c);
    }
    const revisionKey = `${sample.sampleId}\u001f${sample.revision}`;
    const json = canonicalSampleJson(sample);
    const stored = c.revisions.get(revisionKey);
    if (stored !== undefined) return { status: stored === json ? 'duplicate' : 'conflict', evaluationDue: c.mark > c.evaluated };
    c.revisions.set(revisionKey, json);
    const winner = c.winners.get(sample.sampleId);
    let status: StoreOutcome['status'];
    if (winner !== undefined && sample.revision < winner.revision) {
      status = 'superseded';
    } else {
      status = winner === undefined ? 'new' : 'replacement';
      if (winner !== undefined) this.applyContributions(winner.placement, sampleMember(sample), -1);
      this.applyContributions(placement, sampleMember(sample), 1);
      c.winners.set(sample.sampleId, { revision: sample.revision, time: sample.time, placement });
      c.group = placement.group;
    }
    c.mark += 1;
    return { status, evaluationDue: true };
  }

  private applyContributions(placement: Placement, member: string, sign: 1 | -1): void {
    let group = this.bands.get(placement.group);
    if (group === undefined) this.bands.set(placement.group, (group = new Map()));
    for (const { measurand, fromHours, value } of placement.contributions as BandContribution[]) {
      let byEdge = group.get(measurand);
      if (byEdge === undefined) group.set(measurand, (byEdge = new Map()));
      let band = byEdge.get(fromHours);
      if (band === undefined) byEdge.set(fromHours, (band = { n: 0, sum: 0, sumSq: 0, values: new Map() }));
      band.n += sign;
      band.sum += sign * value;
      band.sumSq += sign * value * value;
      if (sign < 0) band.values.delete(member);
      else if (placement.keepValues) band.values.set(member, value);
    }
  }

  async revisions(ref: ComponentRef): Promise<Sample[]> {
    const c = this.componentsByKey.get(componentKey(ref));
    return c === undefined ? [] : [...c.revisions.values()].map((j) => JSON.parse(j) as Sample);
  }

  async component(ref: ComponentRef): Promise<ComponentEntry | undefined> {
    const c = this.componentsByKey.get(componentKey(ref));
    return c && entryOf(c);
  }

  async components(): Promise<ComponentEntry[]> {
    return [...this.componentsByKey.keys()].sort().map((k) => entryOf(this.componentsByKey.get(k)!));
  }

  async population(group: string): Promise<PopulationSums> {
    const out: PopulationSums = {};
    for (const [m, byEdge] of this.bands.get(group) ?? []) {
      const bands = new Map<number, BandSums>();
      for (const [edge, b] of byEdge) {
        const values = [...b.values.values()].sort((x, y) => x - y);
        bands.set(edge, { n: b.n, sum: b.sum, sumSq: b.sumSq, ...(values.length > 0 && { values }) });
      }
      out[m] = bands;
    }
    return out;
  }

  async mark(ref: ComponentRef): Promise<number> {
    return this.componentsByKey.get(componentKey(ref))?.mark ?? 0;
  }

  async acquire(ref: ComponentRef, ttlMs: number): Promise<Lease | undefined> {
    const key = componentKey(ref);
    const held = this.locks.get(key);
    if (held !== undefined && held.expires > this.now()) return undefined;
    const token = randomUUID();
    this.locks.set(key, { token, expires: this.now() + ttlMs });
    return { key, token };
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

  async lastFed(ref: ComponentRef): Promise<FedPosition | undefined> {
    return this.componentsByKey.get(componentKey(ref))?.fed;
  }

  async commit(ref: ComponentRef, lease: Lease, commit: EvaluationCommit): Promise<boolean> {
    if (this.locks.get(lease.key)?.token !== lease.token) return false;
    const key = componentKey(ref);
    const c = this.componentsByKey.get(key);
    if (c === undefined) return false;
    c.evaluated = Math.max(c.evaluated, commit.mark);
    if (commit.fed !== undefined) c.fed = commit.fed;
    for (const step of commit.steps) {
      if (step.findings.length === 0) c.steps.delete(step.sampleId);
      else c.steps.set(step.sampleId, { ...step, time: Date.parse(step.sampledAt) });
    }
    const kept = [...c.steps.values()].sort(byTimeThenId);
    for (const old of kept.slice(0, Math.max(0, kept.length - this.findingsLogLimit))) c.steps.delete(old.sampleId);
    for (const [group, byComponent] of this.baselinesByGroup) if (group !== commit.group) byComponent.delete(key);
    let byComponent = this.baselinesByGroup.get(commit.group);
    if (byComponent === undefined) this.baselinesByGroup.set(commit.group, (byComponent = new Map()));
    if (Object.keys(commit.baselines).length === 0) byComponent.delete(key);
    else byComponent.set(key, commit.baselines);
    return true;
  }

  async groupBaselines(group: string): Promise<Array<readonly [string, ComponentBaselines]>> {
    return [...(this.baselinesByGroup.get(group) ?? [])].sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0));
  }

  async findings(ref: ComponentRef): Promise<StepRecord[]> {
    const c = this.componentsByKey.get(componentKey(ref));
    return c === undefined ? [] : [...c.steps.values()].sort(byTimeThenId).map(({ time: _time, ...step }) => step);
  }
}

function entryOf(c: ComponentState): ComponentEntry {
  let last = -Infinity;
  for (const w of c.winners.values()) last = Math.max(last, w.time);
  return { unit: c.unit, component: c.component, group: c.group, samples: c.winners.size, lastSampledAt: new Date(last).toISOString() };
}

function byTimeThenId(a: { time: number; sampleId: string }, b: { time: number; sampleId: string }): number {
  return a.time - b.time || (a.sampleId < b.sampleId ? -1 : a.sampleId > b.sampleId ? 1 : 0);
}
