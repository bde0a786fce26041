/**
 * The series builder: one component's samples, whatever order they arrived in, become one ordered history
 * split into oil charges. The result depends only on the set of samples, never on arrival order, so a replay
 * gives what the live worker gave.
 */
import type { Sample } from '../domain/event.ts';
import type { Charge, ComponentHistory, Superseded } from './model.ts';

/**
 * Builds the history of one component from its samples (any order, any revisions).
 *
 * - Revisions: the highest revision of a sampleId wins; the lower ones are listed in `superseded`. Two copies
 *   of the same sampleId and revision are one result delivered twice (storage is idempotent on that pair);
 *   should they differ, the one with the smaller serialised form is kept so that the choice is order-free.
 * - Order: by sampledAt, ties by unit hours, then by sampleId; a missing or non-numeric key sorts last.
 * - Charges: a new charge starts at a sample with `componentChanged` or `oilChanged`, or where the oil hours
 *   are lower than the last oil hours known on the current charge (a drain nobody reported).
 *
 * Never throws: missing hours, equal times and all-censored readings are ordinary data here.
 */
export function buildHistory(samples: Iterable<Sample>): ComponentHistory {
  const { winners, superseded } = latestRevisions(samples);
  const ordered = [...winners].sort(compareSamples);
  const first = ordered[0];
  return {
    unit: first?.unit ?? '',
    component: first?.component ?? '',
    samples: ordered,
    charges: splitIntoCharges(ordered),
    superseded,
  };
}

/**
 * The highest revision of every sample (see buildHistory for ties), in first-seen order. `identity` says which
 * samples are revisions of one another: the sampleId within one component, more across a group.
 */
export function latestRevisions(
  samples: Iterable<Sample>,
  identity: (s: Sample) => string = (s) => s.sampleId,
): { winners: Sample[]; superseded: Superseded[] } {
  const byIdentity = new Map<string, Sample[]>();
  for (const s of samples) {
    const key = identity(s);
    const revisions = byIdentity.get(key);
    if (revisions) revisions.push(s);
    else byIdentity.set(key, [s]);
  }
  const winners: Sample[] = [];
  const superseded: Superseded[] = [];
  for (const revisions of byIdentity.values()) {
    const winner = revisions.reduce((best, s) => (preferred(s, best) ? s : best));
    winners.push(winner);
    const older = new Set(revisions.filter((s) => s.revision < winner.revision).map((s) => s.revision));
    for (const revision of older) superseded.push({ sampleId: winner.sampleId, revision, replacedBy: winner.revision });
  }
  superseded.sort((a, b) => compareText(a.sampleId, b.sampleId) || a.revision - b.revision);
  return { winners, superseded };
}

function preferred(candidate: Sample, best: Sample): boolean {
  if (candidate.revision !== best.revision) return candidate.revision > best.revision;
  return compareText(JSON.stringify(candidate), JSON.stringify(best)) < 0;
}

function compareSamples(a: Sample, b: Sample): number {
  return compareKeys(a.time, b.time) || compareKeys(a.unitHours, b.unitHours) || compareText(a.sampleId, b.sampleId);
}

/** Numbers ascending; undefined and NaN after every number, so that the order stays total. */
function compareKeys(a: number | undefined, b: number | undefined): number {
  const x = known(a);
  const y = known(b);
  if (x !== undefined && y !== undefined) return x === y ? 0 : x < y ? -1 : 1;
  return Number(y !== undefined) - Number(x !== undefined);
}

/** Code-unit order, independent of the locale the worker runs in. */
function compareText(a: string, b: string): number {
  return a < b ? -1 : a > b ? 1 : 0;
}

function splitIntoCharges(ordered: readonly Sample[]): Charge[] {
  const [first, ...rest] = ordered;
  if (first === undefined) return [];
  let current: MutableCharge = { index: 0, startedBy: 'first', samples: [first] };
  const charges = [current];
  let lastOilHours = known(first.oilHours);
  for (const s of rest) {
    const startedBy = chargeStart(s, lastOilHours);
    if (startedBy !== undefined) {
      current = { index: charges.length, startedBy, samples: [] };
      charges.push(current);
      lastOilHours = undefined;
    }
    current.samples.push(s);
    lastOilHours = known(s.oilHours) ?? lastOilHours;
  }
  return charges;
}

type MutableCharge = Omit<Charge, 'samples'> & { samples: Sample[] };

function known(n: number | undefined): number | undefined {
  return n === undefined || Number.isNaN(n) ? undefined : n;
}

function chargeStart(s: Sample, lastOilHours: number | undefined): Charge['startedBy'] | undefined {
  if (s.componentChanged) return 'componentChanged';
  if (s.oilChanged) return 'oilChanged';
  if (s.oilHours !== undefined && lastOilHours !== undefined && s.oilHours < lastOilHours) return 'oilHoursReset';
  return undefined;
}
