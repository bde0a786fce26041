/**
 * The pipeline's storage on Redis (single node or Cluster): components and their group shares partitioned by
 * component (keys.ts), every write that must not be seen half-done one Lua script (scripts.ts). Implements the
 * component store and the group ledger of src/pipeline/ports.ts; the incident API (list, get, actions) over the
 * same keys is redisIncidents.ts.
 */
import { randomUUID } from 'node:crypto';
import type { GroupStats, SampleMark } from '../analysis/model.ts';
import type { Config } from '../domain/config.ts';
import { ConfigSchema } from '../domain/config.ts';
import { componentKey, type Sample } from '../domain/event.ts';
import type { Measurand } from '../domain/measurands.ts';
import { resolveSettings } from '../domain/settings.ts';
import { severityRank } from '../domain/finding.ts';
import { emptyComponentIncidents, type ComponentIncidents, type Incident, type StepPosition } from '../incidents/model.ts';
import { comparePosition } from '../incidents/verdict.ts';
import { addBaseline, addPopulation, baselineBucketOf, combineBuckets, groupStatsOf, type BaselineBucket, type MonthBucket, type PopulationCell } from '../pipeline/groupShares.ts';
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
  SharesCommit,
  SharesOutcome,
  StepRecord,
  StoredSample,
  StoreOutcome,
  StoreStatus,
  WordGiven,
} from '../pipeline/ports.ts';
import { decodeCompactSample, decodeSample, encodeSample, encodeSampleCore, isCompactSample } from '../pipeline/sampleCodec.ts';
import type { RedisConnection } from './connection.ts';
import { ScriptValues } from './scriptValues.ts';
import { stepRecordOf, stepRecordText } from './stepRecordText.ts';
import { changedIncidents } from './changedIncidents.ts';
import { compactValue, expandValue } from './compactText.ts';
import { incidentOfRecord, incidentRecordValue } from './incidentRecordValue.ts';
import { COMMON_FIELD, componentKeys, groupKeys, partitionKeys, Partitions } from './keys.ts';
import { ACQUIRE_WITH_INPUT, COMMIT_EVALUATION, MARK_DIRTY, MARK_SAMPLE, OWN_SHARES, RELEASE_LOCK, RENEW_LOCK, SAMPLES_AFTER, STORE_SAMPLE } from './scripts.ts';

export type { RedisConnection };

export interface RedisStoreOptions {
  /** Key prefix; keep a hash tag (braces) for Redis Cluster. Default `{wearshift}`. */
  readonly prefix?: string;
  /** Partitions of the keys (see keys.ts and the README on sharding). Default 1. */
  readonly partitions?: number;
  /** Steps with findings kept per component in the findings log (the oldest go first). Default 200. */
  readonly findingsLogLimit?: number;
  /** The configuration, for each group's population settings. Default: the built-in defaults. */
  readonly config?: Config;
  /**
   * Components whose group statistics "as of a month" are kept in memory (the latest months asked), each with the
   * month versions it was built from, so that the next evaluation of the same component in the same month reads
   * the versions only, and one in a later month adds the months since. Not for the percentile method. Default
   * 1000 (0: none).
   */
  readonly groupStatsMemo?: number;
}

export const DEFAULT_FINDINGS_LOG_LIMIT = 200;
export const DEFAULT_GROUP_STATS_MEMO = 1000;
/** Months kept per component in the memo of group statistics. */
const MEMO_MONTHS = 4;

type ScriptCall = (...args: Array<string | Buffer>) => Promise<unknown>;

const BASELINE_FIELDS = ['components', 'intervals', 'sumHours', 'sumHoursSq', 'sumIncrement', 'sumIncrementSq', 'sumIncrementHours', 'sumLabVariance', 'sumRate', 'sumRateSq', 'positive', 'sumLog', 'sumLogSq'] as const;

export function positionText(p: StepPosition): string {
  return `${p.time}|${p.unitHours ?? ''}|${p.sampleId}`;
}

export function parsePosition(text: string): StepPosition {
  const [time, unitHours, ...rest] = text.split('|');
  return { sampleId: rest.join('|'), time: Number(time), ...(unitHours !== '' && unitHours !== undefined && { unitHours: Number(unitHours) }) };
}

/** Open incidents by severity (highest first), then the most recently opened. */
export function openScore(inc: Incident): string {
  return String((2 - severityRank(inc.severity)) * 1e13 + (1e13 - Date.parse(inc.openedAt)));
}

/**
 * Per incident: its id, the argument number of its stored record (incidentRecordValue.ts, added to `values`), open or
 * closed, its score in that index, its opening time.
 */
export function incidentRecordRows(incidents: readonly Incident[], values: ScriptValues): Array<[string, number, 'open' | 'closed', string, string]> {
  return incidents.map((inc) => [
    inc.id,
    values.add(incidentRecordValue(inc)),
    inc.closed === null ? 'open' : 'closed',
    inc.closed === null ? openScore(inc) : String(Date.parse(inc.closed.at)),
    String(Date.parse(inc.openedAt)),
  ]);
}

/** The commit script's first argument after the payload (token, mark, payload): the stored values follow. */
const FIRST_VALUE_ARGUMENT = 4;

/**
 * The incident part of a commit: each changed incident's record is sent once, as a script argument of its own, which
 * its record row names; and the component's incident state, which holds them too, in its compact form.
 */
function incidentArguments(commit: EvaluationCommit, values: ScriptValues) {
  const state = commit.incidents;
  // Records already on file as they are (the input's state, at the version the commit checks) are not sent again.
  const current = commit.recorded === undefined ? Object.values(state.incidents) : changedIncidents(commit.recorded, state);
  return {
    records: incidentRecordRows([...current, ...commit.archived, ...commit.withdrawn], values),
    state: values.add(compactValue(JSON.stringify(state))),
  };
}

export class RedisStore implements ComponentStore, GroupLedger {
  readonly partitions: Partitions;
  private readonly findingsLogLimit: number;
  private readonly config: Config;
  private readonly scripts: Record<'store' | 'acquireWithInput' | 'samplesAfter' | 'renew' | 'release' | 'commit' | 'markDirty' | 'markSample' | 'ownShares', ScriptCall>;
  /** Month buckets read before, by `partition|group|month` with the version they were read at. */
  private readonly bucketCache = new Map<string, { version: string; bucket: MonthBucket }>();
  /**
   * Group statistics given out before, by `group|component|own group` (least recently used first): for the latest
   * months asked, the sum they were built from and the month versions before them.
   */
  private readonly statsMemo = new Map<string, Array<{ month: string; signature: string; sum: MonthBucket; stats: GroupStats }>>();
  private readonly statsMemoLimit: number;

  constructor(
    private readonly redis: RedisConnection,
    options: RedisStoreOptions = {},
  ) {
    this.partitions = new Partitions(options.prefix, options.partitions ?? 1);
    this.findingsLogLimit = options.findingsLogLimit ?? DEFAULT_FINDINGS_LOG_LIMIT;
    this.statsMemoLimit = options.groupStatsMemo ?? DEFAULT_GROUP_STATS_MEMO;
    this.config = options.config ?? ConfigSchema.parse({});
    const define = (name: string, numberOfKeys: number, lua: string): ScriptCall => {
      const commandName = `wearshift_${name}`;
      if (!(commandName in redis)) redis.defineCommand(commandName, { numberOfKeys, lua });
      const command = (redis as unknown as Record<string, ScriptCall>)[commandName]!;
      return (...args) => command.apply(redis, args);
    };
    // The same script with its reply as bytes (the stored values in it are binary, compactText.ts).
    const defineBytes = (name: string, numberOfKeys: number, lua: string): ScriptCall => {
      define(name, numberOfKeys, lua);
      const command = (redis as unknown as Record<string, ScriptCall>)[`wearshift_${name}Buffer`]!;
      return (...args) => command.apply(redis, args);
    };
    this.scripts = {
      store: define('store', 5, STORE_SAMPLE),
      acquireWithInput: defineBytes('acquireWithInput', 5, ACQUIRE_WITH_INPUT),
      samplesAfter: define('samplesAfter', 3, SAMPLES_AFTER),
      renew: define('renewLock', 1, RENEW_LOCK),
      release: define('releaseLock', 1, RELEASE_LOCK),
      commit: define('commit', 11, COMMIT_EVALUATION),
      markDirty: define('markDirty', 1, MARK_DIRTY),
      markSample: define('markSample', 2, MARK_SAMPLE),
      ownShares: define('ownShares', 2, OWN_SHARES),
    };
  }

  private tagOf(ref: ComponentRef): string {
    return this.partitions.tag(this.partitions.of(ref));
  }

  private keysOf(ref: ComponentRef) {
    const tag = this.tagOf(ref);
    return { tag, c: componentKeys(tag, ref), p: partitionKeys(tag) };
  }

  async store(sample: Sample, group: string, receivedAt: number): Promise<StoreOutcome> {
    const [status, due] = (await this.scripts.store(...this.storeArguments(sample, group, receivedAt))) as [StoreStatus, number];
    return { status, evaluationDue: due === 1 };
  }

  async storeMany(items: readonly { readonly sample: Sample; readonly group: string }[], receivedAt: number): Promise<StoreOutcome[]> {
    // One pipeline per partition (a cluster's pipeline stays within one slot).
    const byTag = new Map<string, number[]>();
    items.forEach(({ sample }, i) => {
      const tag = this.tagOf(sample);
      (byTag.get(tag) ?? byTag.set(tag, []).get(tag)!).push(i);
    });
    const out: StoreOutcome[] = new Array(items.length);
    await Promise.all(
      [...byTag.values()].map(async (indexes) => {
        const pipeline = this.redis.pipeline() as unknown as Record<'wearshift_store', (...args: string[]) => void> & { exec(): Promise<Array<[Error | null, unknown]> | null> };
        for (const i of indexes) pipeline.wearshift_store(...this.storeArguments(items[i]!.sample, items[i]!.group, receivedAt));
        const replies = (await pipeline.exec()) ?? [];
        indexes.forEach((i, k) => {
          const [err, reply] = replies[k] ?? [new Error('no reply from Redis'), undefined];
          if (err !== null) throw err;
          const [status, due] = reply as [StoreStatus, number];
          out[i] = { status, evaluationDue: due === 1 };
        });
      }),
    );
    return out;
  }

  /** The store script's keys and arguments (scripts.ts, STORE_SAMPLE). */
  private storeArguments(sample: Sample, group: string, receivedAt: number): string[] {
    const { c, p } = this.keysOf(sample);
    const registry = JSON.stringify({ unit: sample.unit, component: sample.component, group });
    return [
      c.revisions,
      c.winners,
      c.order,
      c.evaluation,
      p.registry,
      sample.sampleId,
      String(sample.revision),
      encodeSampleCore(sample),
      receivedAt.toString(36),
      String(sample.time),
      sample.unitHours === undefined ? '' : String(sample.unitHours),
      componentKey(sample),
      registry,
      sample.group ?? '',
      sample.lab ?? '',
      encodeSample(sample),
    ];
  }

  async component(ref: ComponentRef): Promise<ComponentEntry | undefined> {
    const { c, p } = this.keysOf(ref);
    const [head, count, last] = await Promise.all([
      this.redis.hget(p.registry, componentKey(ref)),
      this.redis.zcard(c.order),
      this.redis.zrange(c.order, -1, -1, 'WITHSCORES'),
    ]);
    if (head === null) return undefined;
    return entryOf(JSON.parse(head) as RegistryHead, count, last);
  }

  async components(): Promise<ComponentEntry[]> {
    const heads = (
      await Promise.all(this.partitions.all().map(async (n) => Object.values(await this.redis.hgetall(partitionKeys(this.partitions.tag(n)).registry))))
    )
      .flat()
      .map((j) => JSON.parse(j) as RegistryHead);
    heads.sort((a, b) => (componentKey(a) < componentKey(b) ? -1 : componentKey(a) > componentKey(b) ? 1 : 0));
    return Promise.all(
      heads.map(async (h) => {
        const c = componentKeys(this.tagOf(h), h);
        const [count, last] = await Promise.all([this.redis.zcard(c.order), this.redis.zrange(c.order, -1, -1, 'WITHSCORES')]);
        return entryOf(h, count, last);
      }),
    );
  }

  async revisions(ref: ComponentRef): Promise<StoredSample[]> {
    const { c } = this.keysOf(ref);
    const all = await this.redis.hgetall(c.revisions);
    const common = all[COMMON_FIELD];
    return Object.entries(all)
      .filter(([field]) => field !== COMMON_FIELD)
      .map(([field, v]) => stored(field, v, common, ref));
  }

  async samplesAfter(ref: ComponentRef, position: StepPosition | null): Promise<StoredSample[]> {
    const { c } = this.keysOf(ref);
    // One script: the sorted set's ids after the position's time, their winners, the winning revisions.
    const reply = (await this.scripts.samplesAfter(c.order, c.winners, c.revisions, position === null ? '' : positionText(position))) as string[];
    const common = reply[0] === '' ? undefined : reply[0];
    const picked: Array<{ field: string; value: string; position: StepPosition }> = [];
    for (let i = 1; i < reply.length; i += 3) {
      const id = reply[i]!;
      const [revision, time, unitHours] = reply[i + 1]!.split('|');
      const value = reply[i + 2]!;
      if (value === '') throw new Error(`${componentKey(ref)}: revision ${revision} of ${id} missing`);
      picked.push({ field: `${id}\u001f${revision}`, value, position: { sampleId: id, time: Number(time), ...(unitHours !== '' && { unitHours: Number(unitHours) }) } });
    }
    picked.sort((a, b) => comparePosition(a.position, b.position));
    return picked.map((x) => stored(x.field, x.value, common, ref));
  }

  async evaluationInput(ref: ComponentRef): Promise<EvaluationInput | undefined> {
    const { c, p } = this.keysOf(ref);
    const [head, count, last, fields, opened] = await Promise.all([
      this.redis.hget(p.registry, componentKey(ref)),
      this.redis.zcard(c.order),
      this.redis.zrange(c.order, -1, -1, 'WITHSCORES'),
      this.redis.hmgetBuffer(c.evaluation, 'mark', 'dirty', 'latest', 'incidents', 'version', 'marks'),
      this.redis.zrange(c.incidents, -1, -1, 'WITHSCORES'),
    ]);
    return inputOf(ref, head, count, last, [...fields.map((f) => f ?? ''), opened[1] ?? '']);
  }

  async acquireWithInput(ref: ComponentRef, ttlMs: number): Promise<{ lease: Lease; input: EvaluationInput | undefined } | undefined> {
    const { c, p } = this.keysOf(ref);
    const token = randomUUID();
    const reply = (await this.scripts.acquireWithInput(c.lock, p.registry, c.order, c.evaluation, c.incidents, token, String(ttlMs), componentKey(ref))) as Array<Buffer | number>;
    if (reply[0] === 0) return undefined;
    const [, head, count, lastId, lastTime, ...fields] = reply as [number, Buffer, number, Buffer, Buffer, ...Buffer[]];
    return {
      lease: { key: c.lock, token },
      input: inputOf(ref, head.length === 0 ? null : head.toString('utf8'), count, lastId.length === 0 ? [] : [lastId.toString('utf8'), lastTime.toString('utf8')], fields),
    };
  }

  async checkpointBefore(ref: ComponentRef, position: StepPosition): Promise<Checkpoint | undefined> {
    return this.latestCheckpointWhere(ref, (_, at) => comparePosition(at, position) < 0);
  }

  async checkpointAtMost(ref: ComponentRef, count: number): Promise<Checkpoint | undefined> {
    return this.latestCheckpointWhere(ref, (n) => n <= count);
  }

  /** The sparse checkpoint with the highest count among those `accept` takes (by their count and position). */
  private async latestCheckpointWhere(ref: ComponentRef, accept: (count: number, position: StepPosition) => boolean): Promise<Checkpoint | undefined> {
    const { c } = this.keysOf(ref);
    let best: { count: number; field: string } | undefined;
    for (const field of await this.redis.hkeys(c.evaluation)) {
      if (!field.startsWith('cp|')) continue;
      const bar = field.indexOf('|', 3);
      const count = Number(field.slice(3, bar));
      if (!accept(count, parsePosition(field.slice(bar + 1)))) continue;
      if (best === undefined || count > best.count) best = { count, field };
    }
    if (best === undefined) return undefined;
    const stored = await this.redis.hgetBuffer(c.evaluation, best.field);
    return stored === null ? undefined : (JSON.parse(expandValue(stored)) as Checkpoint);
  }

  async acquire(ref: ComponentRef, ttlMs: number): Promise<Lease | undefined> {
    const { c } = this.keysOf(ref);
    const token = randomUUID();
    const ok = await this.redis.set(c.lock, token, 'PX', ttlMs, 'NX');
    return ok === 'OK' ? { key: c.lock, token } : undefined;
  }

  async renew(lease: Lease, ttlMs: number): Promise<boolean> {
    return (await this.scripts.renew(lease.key, lease.token, String(ttlMs))) === 1;
  }

  async release(lease: Lease): Promise<void> {
    await this.scripts.release(lease.key, lease.token);
  }

  /** The group part of a commit's payload: shares, baselines, horizon and where they go. */
  private sharesPayload(ref: ComponentRef, commit: SharesCommit) {
    const g = groupKeys(this.keysOf(ref).tag, commit.group);
    const settings = resolveSettings(this.config, { unit: ref.unit, component: ref.component, group: commit.group });
    return {
      shares: commit.shares.map((s) => [s.sampleId, s.values === null ? '' : `${s.month};${Object.entries(s.values).map(([f, v]) => `${f}=${v}`).join(',')}`]),
      baselines: Object.fromEntries(
        (settings.detection.measurands as Measurand[]).map((m) => {
          const share = commit.baselines[m];
          const entry = share && baselineBucketOf(share.sums);
          return [m, share && entry ? `${share.month};${baselineValues(entry).join(',')}` : ''];
        }),
      ),
      groupPrefix: g.versions.slice(0, -2),
      member: JSON.stringify({ unit: ref.unit, component: ref.component }),
      horizon: commit.horizon,
      registry: JSON.stringify({ unit: ref.unit, component: ref.component, group: commit.group }),
      keepValues: settings.population.method === 'percentile' ? 1 : 0,
      componentKey: componentKey(ref),
    };
  }

  /** The commit script's keys for a component. */
  private commitKeys(ref: ComponentRef, lease: Lease): string[] {
    const { c, p } = this.keysOf(ref);
    return [lease.key, c.evaluation, c.winners, c.steps, c.incidents, c.own, p.registry, p.records, p.open, p.closed, p.outbox];
  }

  async commitShares(ref: ComponentRef, lease: Lease, commit: SharesCommit): Promise<SharesOutcome> {
    const head = { partial: 1, ...this.sharesPayload(ref, commit) };
    const result = (await this.scripts.commit(...this.commitKeys(ref, lease), lease.token, '0', JSON.stringify(head))) as [number, string?];
    if (result[0] !== 1) return { ok: false, reason: 'lost-lock' };
    return { ok: true, ...(result[1] && { changedMonth: result[1] }) };
  }

  async commit(ref: ComponentRef, lease: Lease, commit: EvaluationCommit): Promise<CommitOutcome> {
    const values = new ScriptValues(FIRST_VALUE_ARGUMENT);
    const head = {
      latest: values.add(compactValue(JSON.stringify(commit.latest))),
      sparse: commit.sparse.map((cp) => [`cp|${String(cp.count).padStart(10, '0')}|${positionText(cp.position!)}`, values.add(compactValue(JSON.stringify(cp)))]),
      rewound: commit.rewoundTo === undefined ? '' : commit.rewoundTo === null ? 'start' : positionText(commit.rewoundTo),
      due: commit.dueFrom === undefined ? '' : positionText(commit.dueFrom),
      steps: commit.steps.map((s) => [`${String(Date.parse(s.sampledAt)).padStart(15, '0')}|${s.sampleId}`, s.findings.length === 0 && s.status === undefined ? '' : values.add(stepRecordText(ref, s))]),
      limit: this.findingsLogLimit,
      ...this.sharesPayload(ref, commit),
      version: String(commit.incidentsVersion),
      ...incidentArguments(commit, values),
      outbox: commit.effects.map((e) => JSON.stringify(e)),
      release: commit.releaseWhenSettled === true ? 1 : 0,
    };
    const result = (await this.scripts.commit(...this.commitKeys(ref, lease), lease.token, String(commit.mark), JSON.stringify(head), ...values.values)) as [number, string?, number?];
    if (result[0] === 0) return { ok: false, reason: 'lost-lock' };
    if (result[0] === -1) return { ok: false, reason: 'incidents-changed' };
    return { ok: true, settled: result[2] === 1, ...(result[1] && { changedMonth: result[1] }) };
  }

  async markDirty(marks: readonly { readonly ref: ComponentRef; readonly from: StepPosition }[]): Promise<void> {
    // One round trip per partition (a group's cascade marks dozens; a cluster's pipeline stays within one slot).
    const byTag = new Map<string, string[]>();
    for (const { ref, from } of marks) {
      const tag = this.tagOf(ref);
      const args = byTag.get(tag) ?? byTag.set(tag, []).get(tag)!;
      args.push(this.keysOf(ref).c.evaluation, positionText(from));
    }
    await Promise.all(
      [...byTag.values()].map(async (args) => {
        const pipeline = this.redis.pipeline() as unknown as Record<'wearshift_markDirty', (key: string, position: string) => void> & { exec(): Promise<Array<[Error | null, unknown]> | null> };
        for (let i = 0; i < args.length; i += 2) pipeline.wearshift_markDirty(args[i]!, args[i + 1]!);
        const failed = ((await pipeline.exec()) ?? []).find(([err]) => err !== null);
        if (failed) throw failed[0]!;
      }),
    );
  }

  async markSample(ref: ComponentRef, sampleId: string, mark: SampleMark | null, given?: WordGiven): Promise<boolean> {
    const { c } = this.keysOf(ref);
    return (await this.scripts.markSample(c.evaluation, c.winners, sampleId, mark ?? '', given === undefined ? '' : JSON.stringify(given))) === 1;
  }

  async wordsGiven(ref: ComponentRef): Promise<Map<string, WordGiven>> {
    const raw = await this.redis.hget(this.keysOf(ref).c.evaluation, 'words');
    const byId = JSON.parse(raw ?? '{}') as Record<string, string>;
    return new Map(Object.entries(byId).map(([sampleId, text]) => [sampleId, JSON.parse(text) as WordGiven]));
  }

  async findings(ref: ComponentRef): Promise<StepRecord[]> {
    const { c } = this.keysOf(ref);
    const all = await this.redis.hgetallBuffer(c.steps);
    return Object.keys(all)
      .sort()
      .map((k) => stepRecordOf(ref, all[k]!));
  }

  async incidentsOpenedAfter(ref: ComponentRef, position: StepPosition | null, before?: StepPosition): Promise<Incident[]> {
    const { c, p } = this.keysOf(ref);
    const ids = await this.redis.zrangebyscore(c.incidents, position === null ? '-inf' : position.time, before === undefined ? '+inf' : before.time);
    if (ids.length === 0) return [];
    const raw = await this.redis.hmgetBuffer(p.records, ...ids);
    const incidents = raw.filter((r): r is Buffer => r !== null).map(incidentOfRecord);
    if (position === null && before === undefined) return incidents;
    const openers = await this.redis.hmget(c.winners, ...incidents.map((i) => i.openedBySampleId));
    return incidents.filter((inc, i) => {
      const unitHours = openers[i]?.split('|')[2];
      const opened: StepPosition = { sampleId: inc.openedBySampleId, time: Date.parse(inc.openedAt), ...(unitHours && { unitHours: Number(unitHours) }) };
      return (position === null || comparePosition(opened, position) > 0) && (before === undefined || comparePosition(opened, before) < 0);
    });
  }

  // The group ledger.

  async asOf(group: string, month: string, self: ComponentRef): Promise<GroupStats> {
    return (await this.asOfMonths(group, [month], self)).get(month)!;
  }

  /**
   * The statistics of several months at once (an evaluation's samples span several): the group's versions and the
   * component's own shares are read once, and each month starts from the one before it.
   */
  async asOfMonths(group: string, months: readonly string[], self: ComponentRef): Promise<Map<string, GroupStats>> {
    const settings = resolveSettings(this.config, { unit: self.unit, component: self.component, group });
    const keepValues = settings.population.method === 'percentile';
    const selfKeys = componentKeys(this.tagOf(self), self);
    const [versionsByPartition, head, committedPrefix] = await Promise.all([
      Promise.all(this.partitions.all().map((n) => this.redis.hgetall(groupKeys(this.partitions.tag(n), group).versions))),
      this.redis.hget(partitionKeys(this.tagOf(self)).registry, componentKey(self)),
      this.redis.hget(selfKeys.evaluation, 'gp'),
    ]);
    const withoutOwn = head !== null && (JSON.parse(head) as RegistryHead).group === group;
    // Every change to a month bucket, and to the component's own shares of its group's buckets, moves the month's
    // version in the component's partition: the same versions (and the same own group) give the same statistics.
    const signatureBefore = (month: string) =>
      versionsByPartition
        .map((versions, n) =>
          Object.entries(versions)
            .filter(([m]) => m < month)
            .sort(([a], [b]) => (a < b ? -1 : 1))
            .map(([m, v]) => `${n}:${m}=${v}`)
            .join(','),
        )
        .join(';');
    const memoKey = `${group}|${componentKey(self)}|${withoutOwn ? 'own' : '-'}`;
    // Not for the percentile method (its statistics carry every value of the group), nor while the component's own
    // shares were last committed to another group (they move, and the versions of this group with them, at its next
    // commit).
    const memoized = !keepValues && this.statsMemoLimit > 0 && (!withoutOwn || committedPrefix === groupKeys(this.tagOf(self), group).versions.slice(0, -2));
    let own: { readonly from: string; readonly shares: Promise<OwnShares> } | undefined;
    const ordered = [...new Set(months)].sort();
    const lastMonth = ordered.at(-1) ?? '';
    // Without the memo, the month before serves as the base of the next.
    let previous: { month: string; signature: string; sum: MonthBucket } | undefined;
    const out = new Map<string, GroupStats>();
    for (const month of ordered) {
      const signature = signatureBefore(month);
      const kept = memoized ? this.statsMemo.get(memoKey) : undefined;
      if (kept !== undefined) {
        this.statsMemo.delete(memoKey);
        this.statsMemo.set(memoKey, kept);
      }
      const exact = kept?.find((e) => e.month === month && e.signature === signature);
      if (exact !== undefined) {
        out.set(month, exact.stats);
        previous = exact;
        continue;
      }
      // An earlier month whose months before it are unchanged: its sum plus the months from it on.
      const candidates = [...(kept ?? []), ...(previous !== undefined && !keepValues ? [previous] : [])];
      const base = candidates
        .filter((e) => e.month < month && e.signature === signatureBefore(e.month))
        .sort((a, b) => (a.month < b.month ? -1 : a.month > b.month ? 1 : 0))
        .at(-1);
      const wanted = (m: string) => m < month && (base === undefined || m >= base.month);
      const parts: Array<readonly [MonthBucket, 1 | -1]> = base === undefined ? [] : [[base.sum, 1]];
      await Promise.all(
        versionsByPartition.map(async (versions, n) => {
          const g = groupKeys(this.partitions.tag(n), group);
          await Promise.all(
            Object.entries(versions)
              .filter(([m]) => wanted(m))
              .map(async ([m, version]) => {
                const cacheKey = `${n}|${group}|${m}`;
                const cached = this.bucketCache.get(cacheKey);
                if (cached !== undefined && cached.version === version) {
                  parts.push([cached.bucket, 1]);
                  return;
                }
                const bucket = parseBucket(await this.redis.hgetall(g.bucket(m)));
                if (keepValues) await this.readValues(`${g.bucketPrefix.slice(0, -3)}:vals:${m}:`, bucket);
                this.bucketCache.set(cacheKey, { version, bucket });
                parts.push([bucket, 1]);
              }),
          );
        }),
      );
      if (withoutOwn) {
        // The months this and the later months of the evaluation subtract: from the base on (a later month's base is
        // never earlier), before the last month asked.
        const from = base?.month ?? '';
        if (own === undefined || from < own.from) own = { from, shares: this.ownShares(selfKeys, from, lastMonth) };
        const shares = await own.shares;
        for (const m of shares.months()) if (wanted(m)) parts.push([shares.bucket(m), -1]);
      }
      if (this.bucketCache.size > 10_000) this.bucketCache.clear();
      const sum = combineBuckets(parts, keepValues);
      const stats = groupStatsOf(group, sum, settings);
      out.set(month, stats);
      previous = { month, signature, sum };
      if (memoized) {
        const entries = [...(kept ?? []).filter((e) => e.month !== month), { month, signature, sum, stats }].sort((a, b) => (a.month < b.month ? -1 : 1));
        this.statsMemo.set(memoKey, entries.slice(-MEMO_MONTHS));
        while (this.statsMemo.size > this.statsMemoLimit) this.statsMemo.delete(this.statsMemo.keys().next().value!);
      }
    }
    return out;
  }

  async touch(group: string, self: ComponentRef, horizon: number): Promise<void> {
    const g = groupKeys(this.tagOf(self), group);
    await this.redis.zadd(g.horizons, 'GT', horizon, JSON.stringify({ unit: self.unit, component: self.component }));
  }

  async membersAfter(group: string, from: number): Promise<ComponentRef[]> {
    const lists = await Promise.all(this.partitions.all().map((n) => this.redis.zrangebyscore(groupKeys(this.partitions.tag(n), group).horizons, from, '+inf')));
    return lists.flat().map((j) => JSON.parse(j) as ComponentRef);
  }

  async othersIn(group: string, self: ComponentRef): Promise<number> {
    const member = JSON.stringify({ unit: self.unit, component: self.component });
    const counts = await Promise.all(
      this.partitions.all().map(async (n) => {
        const key = groupKeys(this.partitions.tag(n), group).horizons;
        const [size, own] = await Promise.all([this.redis.zcard(key), this.redis.zscore(key, member)]);
        return size - (own === null ? 0 : 1);
      }),
    );
    return counts.reduce((a, b) => a + b, 0);
  }

  /**
   * The component's own shares of its group's month buckets from month `from` ('' for all) up to, not including,
   * `to`, by month: the population shares of its winners and its baseline entries (what its commits added to the
   * buckets of the group it was last committed to), filtered by month in Redis (scripts.ts, OWN_SHARES). A month's
   * shares are parsed when asked for.
   */
  private async ownShares(c: ReturnType<typeof componentKeys>, from: string, to: string): Promise<OwnShares> {
    const reply = (await this.scripts.ownShares(c.winners, c.evaluation, from, to)) as [number, ...string[]];
    // By month: the winners' population shares (`month;field=value,...`) and the baseline entries ([measurand, values]).
    const raw = new Map<string, { population: string[]; baselines: Array<[Measurand, string]> }>();
    const rawOf = (month: string) => raw.get(month) ?? raw.set(month, { population: [], baselines: [] }).get(month)!;
    const populationEnd = 1 + reply[0];
    for (let i = 1; i < populationEnd; i++) {
      const share = reply[i] as string;
      const semi = share.indexOf(';');
      rawOf(share.slice(0, semi)).population.push(share.slice(semi + 1));
    }
    for (let i = populationEnd; i < reply.length; i += 2) {
      const field = reply[i] as string;
      const entry = reply[i + 1] as string;
      const semi = entry.indexOf(';');
      rawOf(entry.slice(0, semi)).baselines.push([field.slice(3) as Measurand, entry.slice(semi + 1)]);
    }
    const parsed = new Map<string, MonthBucket>();
    return {
      months: () => raw.keys(),
      bucket(month) {
        const done = parsed.get(month);
        if (done !== undefined) return done;
        const b: { population: Record<string, PopulationCell>; baselines: Partial<Record<Measurand, BaselineBucket>> } = { population: {}, baselines: {} };
        const r = raw.get(month);
        for (const list of r?.population ?? []) {
          const values: Record<string, number> = {};
          for (const item of list.split(',')) {
            const eq = item.lastIndexOf('=');
            values[item.slice(0, eq)] = Number(item.slice(eq + 1));
          }
          addPopulation(b.population, values, 1, false);
        }
        for (const [m, list] of r?.baselines ?? []) b.baselines[m] = addBaseline(b.baselines[m], baselineOfValues(list.split(',').map(Number)), 1)!;
        parsed.set(month, b);
        return b;
      },
    };
  }

  /** The values of a month bucket, for the percentile method (one sorted set per field). */
  private async readValues(prefix: string, bucket: MonthBucket): Promise<void> {
    await Promise.all(
      Object.keys(bucket.population).map(async (field) => {
        const scores = await this.redis.zrange(`${prefix}${field}`, 0, -1, 'WITHSCORES');
        const values: number[] = [];
        for (let i = 1; i < scores.length; i += 2) values.push(Number(scores[i]));
        (bucket.population as Record<string, PopulationCell>)[field] = { ...bucket.population[field]!, values: values.sort((a, b) => a - b) };
      }),
    );
  }
}

/** A component's own shares of its group's month buckets (RedisStore.ownShares). */
interface OwnShares {
  months(): Iterable<string>;
  bucket(month: string): MonthBucket;
}

interface RegistryHead {
  readonly unit: string;
  readonly component: string;
  readonly group: string;
}

function entryOf(h: RegistryHead, count: number, last: string[]): ComponentEntry {
  return { unit: h.unit, component: h.component, group: h.group, samples: count, lastSampledAt: new Date(Number(last[1] ?? 0)).toISOString() };
}

/**
 * The evaluation input from the registry entry, the sample count, the last sample and the evaluation fields ('' missing;
 * read as bytes, since the checkpoint and the incident state are stored so, compactText.ts).
 */
function inputOf(ref: ComponentRef, head: string | null, count: number, last: string[], fields: ReadonlyArray<string | Buffer>): EvaluationInput | undefined {
  if (head === null || count === 0) return undefined;
  const text = (v: string | Buffer | undefined) => (v === undefined ? undefined : typeof v === 'string' ? v : v.toString('utf8'));
  const [mark, dirty, version, marks, lastOpened] = [fields[0], fields[1], fields[4], fields[5], fields[6]].map(text);
  const [latest, incidents] = [fields[2], fields[3]];
  return {
    entry: entryOf(JSON.parse(head) as RegistryHead, count, last),
    mark: Number(mark || 0),
    ...(dirty && { dirtyFrom: parsePosition(dirty) }),
    ...(latest && latest.length > 0 && { latest: JSON.parse(expandValue(latest)) as Checkpoint }),
    marks: new Map(Object.entries(JSON.parse(marks || '{}') as Record<string, SampleMark>)),
    incidents: incidents && incidents.length > 0 ? (JSON.parse(expandValue(incidents)) as ComponentIncidents) : emptyComponentIncidents(ref.unit, ref.component),
    incidentsVersion: Number(version || 0),
    ...(lastOpened !== undefined && { lastOpenedAt: lastOpened === '' ? null : Number(lastOpened) }),
  };
}

/**
 * A stored revision: `receivedAt|sample`, the receivedAt in base 36 and the sample in the shorter form (with the
 * component's common group and lab), or, written by the earlier layout, the receivedAt in decimal and the sample as
 * a JSON array.
 */
function stored(field: string, value: string, common: string | undefined, ref: ComponentRef): StoredSample {
  const bar = value.indexOf('|');
  const body = value.slice(bar + 1);
  if (!isCompactSample(body)) return { receivedAt: Number(value.slice(0, bar)), sample: decodeSample(body, ref) };
  const sep = field.lastIndexOf('\u001f');
  if (common === undefined) throw new Error(`${componentKey(ref)}: the common group and lab of the revisions are missing`);
  return { receivedAt: parseInt(value.slice(0, bar), 36), sample: decodeCompactSample(body, field.slice(0, sep), Number(field.slice(sep + 1)), common, ref) };
}

function baselineValues(b: BaselineBucket): number[] {
  return [
    b.components,
    b.sums.intervals,
    b.sums.sumHours,
    b.sums.sumHoursSq,
    b.sums.sumIncrement,
    b.sums.sumIncrementSq,
    b.sums.sumIncrementHours,
    b.sums.sumLabVariance,
    b.sumRate,
    b.sumRateSq,
    b.positive,
    b.sumLog,
    b.sumLogSq,
  ];
}

/** A baseline entry from its stored values (baselineValues' order). */
function baselineOfValues(v: readonly number[]): BaselineBucket {
  const [components, intervals, sumHours, sumHoursSq, sumIncrement, sumIncrementSq, sumIncrementHours, sumLabVariance, sumRate, sumRateSq, positive, sumLog, sumLogSq] = v.map((x) => x ?? 0) as number[];
  return {
    components: components!,
    sums: { intervals: intervals!, sumHours: sumHours!, sumHoursSq: sumHoursSq!, sumIncrement: sumIncrement!, sumIncrementSq: sumIncrementSq!, sumIncrementHours: sumIncrementHours!, sumLabVariance: sumLabVariance! },
    sumRate: sumRate!,
    sumRateSq: sumRateSq!,
    positive: positive!,
    sumLog: sumLog!,
    sumLogSq: sumLogSq!,
  };
}

/** A month bucket from its hash fields: `p|measurand|edge|n|s|q` and `b|measurand|name`. */
function parseBucket(fields: Record<string, string>): MonthBucket {
  const population: Record<string, PopulationCell> = {};
  const raw: Partial<Record<Measurand, Record<string, number>>> = {};
  for (const [field, value] of Object.entries(fields)) {
    const parts = field.split('|');
    if (parts[0] === 'p' && parts.length === 4) {
      const key = `${parts[1]}|${parts[2]}`;
      const cell = (population[key] ??= { n: 0, sum: 0, sumSq: 0 }) as { n: number; sum: number; sumSq: number };
      const v = Number(value);
      if (parts[3] === 'n') cell.n = Math.round(v);
      else if (parts[3] === 's') cell.sum = v;
      else if (parts[3] === 'q') cell.sumSq = v;
    } else if (parts[0] === 'b' && parts.length === 3) {
      (raw[parts[1] as Measurand] ??= {})[parts[2]!] = Number(value);
    }
  }
  for (const [k, cell] of Object.entries(population)) if (cell.n <= 0) delete population[k];
  const baselines: Partial<Record<Measurand, BaselineBucket>> = {};
  for (const [m, v] of Object.entries(raw) as [Measurand, Record<string, number>][]) {
    const components = Math.round(v.components ?? 0);
    if (components <= 0) continue;
    baselines[m] = {
      components,
      sums: {
        intervals: Math.round(v.intervals ?? 0),
        sumHours: v.sumHours ?? 0,
        sumHoursSq: v.sumHoursSq ?? 0,
        sumIncrement: v.sumIncrement ?? 0,
        sumIncrementSq: v.sumIncrementSq ?? 0,
        sumIncrementHours: v.sumIncrementHours ?? 0,
        sumLabVariance: v.sumLabVariance ?? 0,
      },
      sumRate: v.sumRate ?? 0,
      sumRateSq: v.sumRateSq ?? 0,
      positive: Math.round(v.positive ?? 0),
      sumLog: v.sumLog ?? 0,
      sumLogSq: v.sumLogSq ?? 0,
    };
  }
  return { population, baselines };
}

export { BASELINE_FIELDS };
export type { BaselineShare };
