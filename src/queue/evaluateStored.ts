/**
 * The evaluation step, shared by the evaluate worker and replay: under the component's lock, rebuild the
 * whole ordered history from storage (late results take their place), evaluate it with the group's current
 * statistics, feed the incident engine, and commit findings, baselines and progress in one atomic write.
 *
 * Which steps go to the incident engine: those after the last step fed, in order; when there is none (a late
 * or corrected result changed only the past), the latest step again, which the engine treats as a no-op
 * unless its findings changed. Backfill: a step whose sample is older than `backfill.quietAfterDays` at
 * processing time is fed as quiet: recorded and applied to incidents, but nobody is notified.
 */
import { groupBaseline } from '../analysis/baseline.ts';
import { evaluateComponent } from '../analysis/evaluate.ts';
import type { BaselineSums, GroupStats, RateBaseline, Step } from '../analysis/model.ts';
import type { Config } from '../domain/config.ts';
import { componentKey } from '../domain/event.ts';
import type { Finding } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';
import { resolveSettings, type ComponentSettings } from '../domain/settings.ts';
import { bandStatsFromSums } from '../storage/populationSums.ts';
import type { ComponentRef, FedPosition, Lease, Storage } from '../storage/storage.ts';
import type { IncidentEffect } from '../incidents/model.ts';
import type { IncidentChange, IncidentContext, IncidentFeed, IncidentFeedResult } from './incidentFeed.ts';

export interface EvaluationDeps {
  readonly storage: Storage;
  readonly config: Config;
  /** Absent until an incident engine is wired in: findings are still recorded. */
  readonly incidents?: IncidentFeed;
  /** Processing time, epoch ms. */
  readonly now: () => number;
  /** Lifetime of the component lock, renewed at a third of it. Default 30 000 ms. */
  readonly lockTtlMs?: number;
}

export const DEFAULT_LOCK_TTL_MS = 30_000;
const DAY_MS = 86_400_000;

export type EvaluationResult =
  | { readonly kind: 'busy' }
  | { readonly kind: 'empty' }
  | { readonly kind: 'lost-lock' }
  | {
      readonly kind: 'evaluated';
      readonly group: string;
      /** Steps handed to the incident engine, in time order. */
      readonly fed: readonly Step[];
      /** Findings of the steps seen for the first time (not of a latest step fed again). */
      readonly newFindings: readonly Finding[];
      readonly quietBefore: Date;
      readonly incidents: IncidentFeedResult;
      readonly durationMs: number;
    };

export async function evaluateStored(deps: EvaluationDeps, ref: ComponentRef): Promise<EvaluationResult> {
  const ttl = deps.lockTtlMs ?? DEFAULT_LOCK_TTL_MS;
  const lease = await deps.storage.acquire(ref, ttl);
  if (lease === undefined) return { kind: 'busy' };
  const renewal = keepRenewed(deps.storage, lease, ttl);
  try {
    return await evaluateUnderLease(deps, ref, lease, () => renewal.lost);
  } finally {
    renewal.stop();
    await deps.storage.release(lease);
  }
}

async function evaluateUnderLease(deps: EvaluationDeps, ref: ComponentRef, lease: Lease, lost: () => boolean): Promise<EvaluationResult> {
  const started = performance.now();
  const { storage } = deps;
  // Read the mark first: a result stored after this point schedules another evaluation, which will see it.
  const mark = await storage.mark(ref);
  const [entry, revisions, fedBefore] = await Promise.all([storage.component(ref), storage.revisions(ref), storage.lastFed(ref)]);
  if (entry === undefined || revisions.length === 0) return { kind: 'empty' };
  const settings = resolveSettings(deps.config, { unit: entry.unit, component: entry.component, group: entry.group });
  const group = await groupStatsFor(storage, settings, componentKey(ref));
  const evaluation = evaluateComponent(revisions, settings, group);
  const { fed, fresh } = stepsToFeed(evaluation.steps, fedBefore);
  const now = deps.now();
  const quietBefore = new Date(now - deps.config.backfill.quietAfterDays * DAY_MS);
  const incidents = await feedIncidents(deps.incidents, ref, fed, { group: settings.group, now: new Date(now), quietBefore });
  const last = fed.at(-1);
  if (lost()) return { kind: 'lost-lock' };
  const committed = await storage.commit(ref, lease, {
    mark,
    ...(last !== undefined && { fed: { sampleId: last.sampleId, time: Date.parse(last.sampledAt) } }),
    steps: evaluation.steps,
    group: settings.group,
    baselines: evaluation.baselines,
  });
  if (!committed) return { kind: 'lost-lock' };
  return {
    kind: 'evaluated',
    group: settings.group,
    fed,
    newFindings: fresh.flatMap((s) => s.findings),
    quietBefore,
    incidents,
    durationMs: performance.now() - started,
  };
}

/**
 * One step at a time, as replay feeds them, so that the incidents do not depend on how many results one
 * evaluation took in: an incident opened and closed inside a batch is committed like any other.
 */
async function feedIncidents(feed: IncidentFeed | undefined, ref: ComponentRef, steps: readonly Step[], context: IncidentContext): Promise<IncidentFeedResult> {
  const changes: IncidentChange[] = [];
  const effects: IncidentEffect[] = [];
  if (feed === undefined) return { changes, effects };
  for (const step of steps) {
    const r = await feed.apply(ref, [step], context);
    changes.push(...r.changes);
    effects.push(...r.effects);
  }
  return { changes, effects };
}

/** Steps after the last one fed; when none, the latest step again (see the module comment). */
export function stepsToFeed(steps: readonly Step[], fed: FedPosition | undefined): { fed: Step[]; fresh: Step[] } {
  if (steps.length === 0) return { fed: [], fresh: [] };
  let fresh: Step[];
  if (fed === undefined) fresh = [...steps];
  else {
    const at = steps.findIndex((s) => s.sampleId === fed.sampleId);
    fresh = at >= 0 ? steps.slice(at + 1) : steps.filter((s) => Date.parse(s.sampledAt) > fed.time);
  }
  return { fed: fresh.length > 0 ? fresh : [steps.at(-1)!], fresh };
}

/**
 * The group's population bands and pooled baseline. The component's own stored sums stay out of its group
 * baseline: the group is the reference while the own history is short, and judging a component against
 * itself would make its early steps depend on how often it had been evaluated before.
 */
export async function groupStatsFor(storage: Storage, settings: ComponentSettings, self: string): Promise<GroupStats> {
  const [population, stored] = await Promise.all([storage.population(settings.group), storage.groupBaselines(settings.group)]);
  const others = stored.filter(([key]) => key !== self);
  const baselines: Partial<Record<Measurand, RateBaseline>> = {};
  for (const m of settings.detection.measurands) {
    const sums = others.map(([, b]) => b[m]).filter((b): b is BaselineSums => b !== undefined);
    const pooled = groupBaseline(sums, settings.detection.budget.sampleIntervalHours);
    if (pooled !== undefined) baselines[m] = pooled;
  }
  return { group: settings.group, bands: bandStatsFromSums(population, settings.population), baselines };
}

interface Renewal {
  readonly lost: boolean;
  stop(): void;
}

function keepRenewed(storage: Storage, lease: Lease, ttl: number): Renewal {
  const state = { lost: false };
  const timer = setInterval(() => {
    storage.renew(lease, ttl).then(
      (ok) => {
        if (!ok) state.lost = true;
      },
      () => {
        // Redis unreachable: the lock may lapse; the fenced commit refuses to write if it did.
      },
    );
  }, Math.max(1000, Math.floor(ttl / 3)));
  timer.unref();
  return {
    get lost() {
      return state.lost;
    },
    stop: () => clearInterval(timer),
  };
}
