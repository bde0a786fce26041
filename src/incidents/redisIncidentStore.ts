/**
 * The incident engine over Redis. Each component's incident state is one versioned hash; an operation reads
 * it, runs the pure engine, and commits with a Lua compare-and-set that also writes the incident records, the
 * list indexes and the outbox of effects — all or nothing, so a crash between the state change and the
 * hand-over of its effects loses neither. A lost race (an acknowledgement from the API while a worker
 * evaluates the same component) re-reads and recomputes. All keys share the configured prefix, whose braces
 * are a Redis Cluster hash tag: the scripts touch several keys and need them in one slot.
 */
import type { Redis } from 'ioredis';
import type { Step } from '../analysis/model.ts';
import { severityRank } from '../domain/finding.ts';
import { applyAction, type ActionResult, type IncidentAction } from './applyAction.ts';
import { applyEscalationCheck, type EscalationCheck } from './applyEscalationCheck.ts';
import { applySteps } from './applySteps.ts';
import { IncidentConflictError, IncidentNotFoundError } from './errors.ts';
import { matchesFilter, type IncidentFilter } from './listFilter.ts';
import { emptyComponentIncidents, findIncident, summarize, type ComponentIncidents, type Incident, type IncidentEffect, type IncidentSummary } from './model.ts';
import type { IncidentRules } from './policy.ts';

export interface RedisIncidentStoreOptions {
  readonly rules: IncidentRules;
  /** Key prefix; default `{wearshift}`. Keep a hash tag (braces) for Redis Cluster. */
  readonly prefix?: string;
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
  /** The component's incidents before and after, for callers that report what changed. */
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

/** The old version, and everything the new one writes. Strings only: cjson turns large numbers into floats. */
const COMMIT = `
local current = redis.call('HGET', KEYS[1], 'version') or '0'
if current ~= ARGV[1] then return 0 end
local p = cjson.decode(ARGV[2])
redis.call('HSET', KEYS[1], 'version', p.version, 'state', p.state)
for _, r in ipairs(p.records) do
  redis.call('HSET', KEYS[2], r[1], r[2])
  redis.call('HSET', KEYS[3], r[1], p.owner)
  if r[3] == 'open' then
    redis.call('ZADD', KEYS[4], r[4], r[1])
    redis.call('ZREM', KEYS[5], r[1])
  else
    redis.call('ZADD', KEYS[5], r[4], r[1])
    redis.call('ZREM', KEYS[4], r[1])
  end
end
for _, e in ipairs(p.outbox) do redis.call('RPUSH', KEYS[6], e) end
return 1
`;

/** Claims up to ARGV[2] effects: first those whose claim went stale (a drainer died), then new ones. */
const CLAIM = `
local n = tonumber(ARGV[2])
local out = redis.call('ZRANGEBYSCORE', KEYS[2], '-inf', ARGV[3], 'LIMIT', 0, n)
for _, m in ipairs(out) do redis.call('ZADD', KEYS[2], ARGV[1], m) end
local rest = n - #out
if rest > 0 then
  local items = redis.call('LPOP', KEYS[1], rest)
  if items then
    for _, m in ipairs(items) do
      redis.call('ZADD', KEYS[2], ARGV[1], m)
      table.insert(out, m)
    end
  end
end
return out
`;

/** Higher severity first, then the most recently opened: the order an alarm summary shows. */
function openScore(inc: Incident): string {
  const opened = Date.parse(inc.openedAt);
  return String((2 - severityRank(inc.severity)) * 1e13 + (1e13 - opened));
}

export class RedisIncidentStore {
  private readonly prefix: string;
  private readonly rules: IncidentRules;
  private readonly maxAttempts: number;

  constructor(
    private readonly redis: Redis,
    options: RedisIncidentStoreOptions,
  ) {
    this.prefix = options.prefix ?? '{wearshift}';
    this.rules = options.rules;
    this.maxAttempts = options.maxAttempts ?? 25;
  }

  private key(part: string): string {
    return `${this.prefix}:incidents:${part}`;
  }

  private stateKey(ref: ComponentRef): string {
    // Encoded parts: a unit or component name may itself hold '/'.
    return this.key(`state:${encodeURIComponent(ref.unit)}/${encodeURIComponent(ref.component)}`);
  }

  /** Feeds evaluation steps of one component (see applySteps); effects go to the outbox. */
  async applySteps(ref: ComponentRef, steps: readonly Step[], input: StepsInput): Promise<StoredStepsResult> {
    return this.update(ref, (before) => {
      const r = applySteps(before, steps, { ...input, rules: this.rules });
      return { ...r, before };
    });
  }

  /** An operator action (acknowledge, shelve, unshelve, resolve, note); errors name the field or the conflict. */
  async applyAction(action: IncidentAction): Promise<ActionResult> {
    const ref = await this.owner(action.incidentId);
    if (ref === undefined) throw new IncidentNotFoundError(action.incidentId);
    return this.update(ref, (state) => {
      if (findIncident(state, action.incidentId) === undefined) {
        // Only a closed incident leaves the component's state: a later one of the same key replaced it.
        throw new IncidentConflictError(action.incidentId, 'is closed and archived; its timeline is final');
      }
      return applyAction(state, action, this.rules);
    });
  }

  /** A delayed escalation check; an incident the store does not know is a stale job and yields nothing. */
  async applyEscalationCheck(check: EscalationCheck): Promise<{ effects: readonly IncidentEffect[] }> {
    const ref = await this.owner(check.incidentId);
    if (ref === undefined) return { effects: [] };
    const r = await this.update(ref, (state) => applyEscalationCheck(state, check, this.rules));
    return { effects: r.effects };
  }

  async component(ref: ComponentRef): Promise<ComponentIncidents> {
    return (await this.read(ref)).state;
  }

  async get(incidentId: string): Promise<Incident | undefined> {
    const raw = await this.redis.hget(this.key('records'), incidentId);
    return raw === null ? undefined : (JSON.parse(raw) as Incident);
  }

  /** Open incidents by severity (highest first), then newest first; closed ones newest closing first. */
  async list(filter: IncidentFilter): Promise<IncidentSummary[]> {
    const out: IncidentSummary[] = [];
    const wantOpen = filter.state !== 'closed';
    const wantClosed = filter.state === 'closed' || filter.state === 'all';
    if (wantOpen) await this.scan(this.key('open'), false, filter, out);
    if (wantClosed && out.length < filter.limit) await this.scan(this.key('closed'), true, filter, out);
    return out;
  }

  /**
   * Hands the outbox to `handler` in batches until it is empty; returns how many effects were handed over.
   * An effect leaves the outbox only after its handler resolved; a failed or interrupted batch is handed out
   * again (after the claim timeout), so the handler must be idempotent — effect keys make that easy.
   */
  async drainOutbox(handler: (effects: IncidentEffect[]) => Promise<void>, options: DrainOptions = {}): Promise<number> {
    const batchSize = options.batchSize ?? 100;
    const claimTimeoutMs = options.claimTimeoutMs ?? 60_000;
    const now = options.now ?? Date.now;
    let handed = 0;
    for (;;) {
      const t = now();
      const raw = (await this.redis.eval(CLAIM, 2, this.key('outbox'), this.key('outbox:claimed'), String(t), String(batchSize), String(t - claimTimeoutMs))) as string[];
      if (raw.length === 0) return handed;
      await handler(raw.map((r) => JSON.parse(r) as IncidentEffect));
      await this.redis.zrem(this.key('outbox:claimed'), ...raw);
      handed += raw.length;
    }
  }

  /** Effects waiting in the outbox, and claimed ones not yet confirmed. */
  async outboxSize(): Promise<{ waiting: number; claimed: number }> {
    const [waiting, claimed] = await Promise.all([this.redis.llen(this.key('outbox')), this.redis.zcard(this.key('outbox:claimed'))]);
    return { waiting, claimed };
  }

  private async scan(zset: string, newestFirst: boolean, filter: IncidentFilter, out: IncidentSummary[]): Promise<void> {
    const page = 200;
    for (let start = 0; out.length < filter.limit; start += page) {
      const ids = newestFirst ? await this.redis.zrevrange(zset, start, start + page - 1) : await this.redis.zrange(zset, start, start + page - 1);
      if (ids.length === 0) return;
      const records = await this.redis.hmget(this.key('records'), ...ids);
      for (const raw of records) {
        if (raw === null) continue;
        const summary = summarize(JSON.parse(raw) as Incident);
        if (matchesFilter(summary, filter)) out.push(summary);
        if (out.length >= filter.limit) return;
      }
    }
  }

  private async owner(incidentId: string): Promise<ComponentRef | undefined> {
    const raw = await this.redis.hget(this.key('owners'), incidentId);
    return raw === null ? undefined : (JSON.parse(raw) as ComponentRef);
  }

  private async read(ref: ComponentRef): Promise<{ version: string; state: ComponentIncidents }> {
    const [version, raw] = await this.redis.hmget(this.stateKey(ref), 'version', 'state');
    return { version: version ?? '0', state: raw === null || raw === undefined ? emptyComponentIncidents(ref.unit, ref.component) : (JSON.parse(raw) as ComponentIncidents) };
  }

  private async update<R extends { state: ComponentIncidents; effects: readonly IncidentEffect[] }>(ref: ComponentRef, operate: (state: ComponentIncidents) => R): Promise<R> {
    for (let attempt = 1; ; attempt++) {
      const { version, state } = await this.read(ref);
      const result = operate(state);
      const records = changedIncidents(state, result.state).map((inc) => [
        inc.id,
        JSON.stringify(inc),
        inc.closed === null ? 'open' : 'closed',
        inc.closed === null ? openScore(inc) : String(Date.parse(inc.closed.at)),
      ]);
      if (records.length === 0 && result.effects.length === 0 && JSON.stringify(state) === JSON.stringify(result.state)) return result;
      const payload = {
        version: String(Number(version) + 1),
        state: JSON.stringify(result.state),
        owner: JSON.stringify({ unit: ref.unit, component: ref.component }),
        records,
        outbox: result.effects.map((e) => JSON.stringify(e)),
      };
      const k = (p: string) => this.key(p);
      const committed = await this.redis.eval(COMMIT, 6, this.stateKey(ref), k('records'), k('owners'), k('open'), k('closed'), k('outbox'), version, JSON.stringify(payload));
      if (committed === 1) return result;
      if (attempt >= this.maxAttempts) throw new Error(`incidents of ${ref.unit}/${ref.component}: gave up after ${attempt} concurrent updates`);
      await new Promise((r) => setTimeout(r, Math.random() * Math.min(50, 2 ** attempt)));
    }
  }
}

function changedIncidents(before: ComponentIncidents, after: ComponentIncidents): Incident[] {
  const old = new Map(Object.values(before.incidents).map((i) => [i.id, JSON.stringify(i)]));
  return Object.values(after.incidents).filter((i) => old.get(i.id) !== JSON.stringify(i));
}
