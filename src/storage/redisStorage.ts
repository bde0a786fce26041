/**
 * Storage in Redis for the live worker. Every write that must not be seen half-done is one Lua script
 * (scripts.ts): storing a result together with its registry entry, population sums and change mark;
 * committing an evaluation only while its lock is still held.
 */
import { randomUUID } from 'node:crypto';
import type { Redis } from 'ioredis';
import { componentKey, type Sample } from '../domain/event.ts';
import { isMeasurand, type Measurand } from '../domain/measurands.ts';
import { canonicalSampleJson, sampleMember } from './canonical.ts';
import { DEFAULT_PREFIX, storageKeys, type StorageKeys } from './keys.ts';
import type { BandSums } from './populationSums.ts';
import { COMMIT_EVALUATION, RELEASE_LOCK, RENEW_LOCK, STORE_SAMPLE } from './scripts.ts';
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
  StoreStatus,
} from './storage.ts';

export interface RedisStorageOptions {
  /** Key prefix; keep a hash tag (braces) for Redis Cluster. Default `{wearshift}`. */
  prefix?: string;
  /** Steps with findings kept per component in the findings log (the oldest go first). Default 1000. */
  findingsLogLimit?: number;
}

type ScriptCall = (...args: string[]) => Promise<unknown>;

export class RedisStorage implements Storage {
  private readonly keys: StorageKeys;
  private readonly findingsLogLimit: number;
  private readonly scripts: Record<'storeSample' | 'renewLock' | 'releaseLock' | 'commitEvaluation', ScriptCall>;

  constructor(
    private readonly redis: Redis,
    options: RedisStorageOptions = {},
  ) {
    this.keys = storageKeys(options.prefix ?? DEFAULT_PREFIX);
    this.findingsLogLimit = options.findingsLogLimit ?? 1000;
    const define = (name: string, numberOfKeys: number, lua: string): ScriptCall => {
      const commandName = `wearshift_${name}`;
      redis.defineCommand(commandName, { numberOfKeys, lua });
      const command = (redis as unknown as Record<string, ScriptCall>)[commandName]!;
      return (...args) => command.apply(redis, args);
    };
    this.scripts = {
      storeSample: define('storeSample', 7, STORE_SAMPLE),
      renewLock: define('renewLock', 1, RENEW_LOCK),
      releaseLock: define('releaseLock', 1, RELEASE_LOCK),
      commitEvaluation: define('commitEvaluation', 6, COMMIT_EVALUATION),
    };
  }

  async store(sample: Sample, placement: Placement): Promise<StoreOutcome> {
    const k = this.keys;
    const placementJson = JSON.stringify({
      g: placement.group,
      k: placement.keepValues ? 1 : 0,
      c: placement.contributions.map((c) => [c.measurand, String(c.fromHours), String(c.value), String(c.value * c.value)]),
    });
    const registryJson = JSON.stringify({ unit: sample.unit, component: sample.component, group: placement.group });
    const [status, due] = (await this.scripts.storeSample(
      k.revisions(sample),
      k.winners(sample),
      k.times(sample),
      k.contributions(sample),
      k.registry,
      k.mark(sample),
      k.evaluated(sample),
      sample.sampleId,
      String(sample.revision),
      canonicalSampleJson(sample),
      String(sample.time),
      placementJson,
      componentKey(sample),
      registryJson,
      k.populationPrefix,
      sampleMember(sample),
    )) as [StoreStatus, number];
    return { status, evaluationDue: due === 1 };
  }

  async revisions(ref: ComponentRef): Promise<Sample[]> {
    const values = await this.redis.hvals(this.keys.revisions(ref));
    return values.map((j) => JSON.parse(j) as Sample);
  }

  async component(ref: ComponentRef): Promise<ComponentEntry | undefined> {
    const json = await this.redis.hget(this.keys.registry, componentKey(ref));
    return json === null ? undefined : (await this.entries([json]))[0];
  }

  async components(): Promise<ComponentEntry[]> {
    const all = await this.redis.hgetall(this.keys.registry);
    const keys = Object.keys(all).sort();
    return this.entries(keys.map((key) => all[key]!));
  }

  private async entries(registryJson: string[]): Promise<ComponentEntry[]> {
    const heads = registryJson.map((j) => JSON.parse(j) as Pick<ComponentEntry, 'unit' | 'component' | 'group'>);
    const pipeline = this.redis.pipeline();
    for (const h of heads) {
      pipeline.zcard(this.keys.times(h));
      pipeline.zrange(this.keys.times(h), -1, -1, 'WITHSCORES');
    }
    const replies = (await pipeline.exec()) ?? [];
    return heads.map((h, i) => {
      const [countErr, count] = replies[2 * i]!;
      const [lastErr, last] = replies[2 * i + 1]!;
      if (countErr || lastErr) throw countErr ?? lastErr;
      const lastScore = (last as string[])[1];
      return { ...h, samples: count as number, lastSampledAt: new Date(Number(lastScore)).toISOString() };
    });
  }

  async population(group: string): Promise<PopulationSums> {
    const key = this.keys.populationPrefix + group;
    const fields = await this.redis.hgetall(key);
    const raw = new Map<string, { measurand: Measurand; edge: number; n: number; sum: number; sumSq: number }>();
    for (const [field, value] of Object.entries(fields)) {
      const [m, edge, part] = field.split('|');
      if (m === undefined || !isMeasurand(m) || edge === undefined) continue;
      const id = `${m}|${edge}`;
      let entry = raw.get(id);
      if (entry === undefined) raw.set(id, (entry = { measurand: m, edge: Number(edge), n: 0, sum: 0, sumSq: 0 }));
      if (part === 'n') entry.n = Number(value);
      else if (part === 's') entry.sum = Number(value);
      else if (part === 'q') entry.sumSq = Number(value);
    }
    const ids = [...raw.keys()];
    const pipeline = this.redis.pipeline();
    for (const id of ids) pipeline.zrange(`${key}|${id}`, 0, -1, 'WITHSCORES');
    const replies = ids.length > 0 ? ((await pipeline.exec()) ?? []) : [];
    const out: PopulationSums = {};
    ids.forEach((id, i) => {
      const e = raw.get(id)!;
      const [err, reply] = replies[i]!;
      if (err) throw err;
      const flat = reply as string[];
      const values: number[] = [];
      for (let j = 1; j < flat.length; j += 2) values.push(Number(flat[j]));
      const sums: BandSums = { n: e.n, sum: e.sum, sumSq: e.sumSq, ...(values.length > 0 && { values }) };
      (out[e.measurand] ??= new Map()).set(e.edge, sums);
    });
    return out;
  }

  async mark(ref: ComponentRef): Promise<number> {
    return Number((await this.redis.get(this.keys.mark(ref))) ?? 0);
  }

  async acquire(ref: ComponentRef, ttlMs: number): Promise<Lease | undefined> {
    const key = this.keys.lock(ref);
    const token = randomUUID();
    const ok = await this.redis.set(key, token, 'PX', ttlMs, 'NX');
    return ok === 'OK' ? { key, token } : undefined;
  }

  async renew(lease: Lease, ttlMs: number): Promise<boolean> {
    return (await this.scripts.renewLock(lease.key, lease.token, String(ttlMs))) === 1;
  }

  async release(lease: Lease): Promise<void> {
    await this.scripts.releaseLock(lease.key, lease.token);
  }

  async lastFed(ref: ComponentRef): Promise<FedPosition | undefined> {
    const json = await this.redis.get(this.keys.fed(ref));
    return json === null ? undefined : (JSON.parse(json) as FedPosition);
  }

  async commit(ref: ComponentRef, lease: Lease, commit: EvaluationCommit): Promise<boolean> {
    const k = this.keys;
    const steps = commit.steps.map((s) => [s.sampleId, String(Date.parse(s.sampledAt)), s.findings.length === 0 ? '' : JSON.stringify(s)]);
    const baselines = Object.keys(commit.baselines).length === 0 ? '' : JSON.stringify(commit.baselines);
    const done = await this.scripts.commitEvaluation(
      lease.key,
      k.evaluated(ref),
      k.fed(ref),
      k.steps(ref),
      k.stepTimes(ref),
      k.baselineGroup(ref),
      lease.token,
      String(commit.mark),
      commit.fed === undefined ? '' : JSON.stringify(commit.fed),
      JSON.stringify(steps),
      String(this.findingsLogLimit),
      k.baselinesPrefix,
      commit.group,
      componentKey(ref),
      baselines,
    );
    return done === 1;
  }

  async groupBaselines(group: string): Promise<Array<readonly [string, ComponentBaselines]>> {
    const all = await this.redis.hgetall(this.keys.baselinesPrefix + group);
    return Object.keys(all)
      .sort()
      .map((key) => [key, JSON.parse(all[key]!) as ComponentBaselines] as const);
  }

  async findings(ref: ComponentRef): Promise<StepRecord[]> {
    const ids = await this.redis.zrange(this.keys.stepTimes(ref), 0, -1);
    if (ids.length === 0) return [];
    const values = await this.redis.hmget(this.keys.steps(ref), ...ids);
    return values.filter((v): v is string => v !== null).map((v) => JSON.parse(v) as StepRecord);
  }
}
