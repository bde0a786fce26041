/**
 * When each demo result is sent: the fleet's 18 months of lab reports, in report order, played back in a few
 * seconds. The fleet's calendar is moved by whole months so that its last report arrived within the month before the
 * run: the intake refuses samples dated in the future, and a fixed calendar would drift into the past. Each date keeps
 * its place within its month (the same share of the way through it), so every sample falls in the same month of the
 * story whatever day the demo runs: the group's statistics are taken as of each sample's calendar month, and a shift
 * by days would move month boundaries between samples and change the story from one day to the next.
 */
import type { ResultEvent } from '../domain/event.ts';
import type { DemoResult } from './fleet.ts';

const DAY_MS = 86_400_000;

export interface PlannedResult {
  readonly event: ResultEvent;
  /** Milliseconds after the start of the playback. */
  readonly atMs: number;
}

export interface FeedPlan {
  /** Whole calendar months added to every date of the fleet (negative: moved back). */
  readonly shiftMonths: number;
  readonly results: readonly PlannedResult[];
  readonly firstSampledAt: string;
  readonly lastSampledAt: string;
}

export interface FeedPlanOptions {
  /** The run's clock, epoch ms. */
  readonly now: number;
  /** How long the playback of the whole feed takes. */
  readonly durationMs: number;
}

export function planFeed(fleet: readonly DemoResult[], options: FeedPlanOptions): FeedPlan {
  if (fleet.length === 0) throw new RangeError('planFeed: the fleet holds no results');
  const ordered = [...fleet].sort((a, b) => a.reportedAt - b.reportedAt);
  const first = ordered[0]!.reportedAt;
  const last = ordered.at(-1)!.reportedAt;
  const yesterday = options.now - DAY_MS;
  let shiftMonths = monthIndex(yesterday) - monthIndex(last);
  if (shiftByMonths(last, shiftMonths) > yesterday) shiftMonths -= 1;
  const span = Math.max(1, last - first);
  const results = ordered.map((r) => ({
    event: { ...r.event, sampledAt: new Date(shiftByMonths(Date.parse(r.event.sampledAt), shiftMonths)).toISOString() },
    atMs: Math.round(((r.reportedAt - first) / span) * options.durationMs),
  }));
  const sampled = results.map((r) => r.event.sampledAt).sort();
  return { shiftMonths, results, firstSampledAt: sampled[0]!, lastSampledAt: sampled.at(-1)! };
}

/** Months since year 0 of the UTC calendar month holding `t` (epoch ms). */
function monthIndex(t: number): number {
  const d = new Date(t);
  return d.getUTCFullYear() * 12 + d.getUTCMonth();
}

function monthStart(index: number): number {
  return Date.UTC(Math.floor(index / 12), index % 12, 1);
}

/**
 * `t` (epoch ms) moved by `months` calendar months, keeping the share of its month that had passed: the 16th of a
 * 31-day month at noon is half way through it, and so is its image. Monotonic, and never leaves the target month.
 */
export function shiftByMonths(t: number, months: number): number {
  const i = monthIndex(t);
  const from = monthStart(i);
  const to = monthStart(i + months);
  return to + Math.floor(((t - from) * (monthStart(i + months + 1) - to)) / (monthStart(i + 1) - from));
}
