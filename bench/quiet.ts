/**
 * The `quiet` part: is the product quiet by default, and still early? Invented fleets (quietFleet.ts: gearboxes and
 * diesel engines, 40 % unit-to-unit spread of the wear rates, lab noise, censored readings, steady contaminants,
 * drains with residual oil, top-ups, irregular intervals) go through the product's shared evaluation path — the
 * in-process pipeline of `wearshift replay` and `wearshift backtest` (replayRecords: storing, evaluation with group
 * statistics as of each sample's time, the incident verdict) — with the BUILT-IN DEFAULTS (an empty configuration),
 * records in sampling-time order as a lab export would list them.
 *
 * Two runs over the same fleets:
 * 1. clean: every component healthy. Incidents per 100 component-years (8760 operating hours, the budget's default
 *    year), per rule family (the families of the findings that opened the incident; an incident opened by two
 *    families counts for each) and in total, machine (wear) incidents and sampling incidents apart.
 * 2. injected: a third of the components get a wear change on one metal (×2 step, ×2 ramp over 1000 h, ×1.5 step, at
 *    a random sample between the 16th and the 40th), another third one sampling fault (new-oil bottle mid-charge, oil
 *    hours going back without an oil change, unit hours going back, one metal far below what the charge holds, a
 *    duplicated bottle, another unit's sample on another oil; and, reported apart, another unit's sample on the same
 *    oil) at a random sample between the 16th and the 80th.
 *
 * A change is caught at the first sample from the change on at which a machine incident is opened or escalated on the
 * changed metal (a finding of a non-sampling family raised, or its severity changed, on that metal) that the clean
 * twin does not have at the same sample. Delay: samples from the first sample after the rate has doubled (a step at
 * once, a ramp at its end; 1: that sample; a ramp caught while still rising counts as 1).
 * A fault is flagged when its sample carries a `sampling` finding; it opens a wear incident when, within the fault's
 * sample and the next 5, a machine incident is opened or escalated that the clean twin does not have.
 */
import { changeDesign, samplesPerBudgetPeriod } from '../src/analysis/budget.ts';
import type { Config } from '../src/domain/config.ts';
import { parseConfig } from '../src/domain/configFile.ts';
import type { ResultEvent } from '../src/domain/event.ts';
import { RULE_FAMILIES, type RuleFamily } from '../src/domain/finding.ts';
import type { Incident } from '../src/incidents/model.ts';
import type { SourceRecord } from '../src/intake/fileRecords.ts';
import { componentView } from '../src/pipeline/componentView.ts';
import { replayRecords } from '../src/pipeline/replay.ts';
import { seededRandom, type Random } from '../src/simulation/random.ts';
import { FLEET_KINDS, mix, newOilReadings, simulateUnit, type ComponentPlan, type FleetKindName, type SimulatedUnit, type WearChange } from './quietFleet.ts';
import { ceilingProbability } from './detectionCeiling.ts';
import type { PartResult } from './report.ts';
import { fmt, median, round } from './stats.ts';

export interface QuietOptions {
  /** Components per fleet kind (gearboxes, engines). Default 150. */
  readonly componentsPerKind?: number;
  /** Samples per component. Default 100 (about 2.9 years at 250 h). */
  readonly samples?: number;
  /** Components per like-for-like group. Default 25. */
  readonly groupSize?: number;
  readonly seed?: number;
  /**
   * Independent fleets, seeded `seed`, `seed + 1`, …, each in groups of its own, measured together: every figure is pooled
   * over them, and the main ones are also given per fleet (one fleet's 30–34 changes of a kind move a share by about 3
   * points each). Default 1.
   */
  readonly fleets?: number;
  /** Configuration text (YAML) to measure instead of the built-in defaults (the runner always measures the defaults). */
  readonly configText?: string;
  /** Progress lines. */
  readonly log?: (line: string) => void;
}

export const FAULT_KINDS = ['new-oil-bottle', 'oil-hours-back', 'unit-hours-back', 'reading-drop', 'duplicate-bottle', 'other-unit-other-oil', 'other-unit-same-oil'] as const;
export type FaultKind = (typeof FAULT_KINDS)[number];
/** Kinds the sampling-fault targets are judged on; the same-oil mix-up is reported apart (nothing in the sample tells it). */
const TARGET_FAULTS: readonly FaultKind[] = FAULT_KINDS.filter((k) => k !== 'other-unit-same-oil');

export const CHANGE_KINDS = [
  { label: '×2 step', shape: 'step', factor: 2 },
  { label: '×2 ramp (1000 h)', shape: 'ramp', factor: 2 },
  { label: '×1.5 step', shape: 'step', factor: 1.5 },
] as const;

const CHANGED_METALS: Readonly<Record<FleetKindName, readonly string[]>> = { gearbox: ['Fe', 'Cu'], engine: ['Fe', 'Cu', 'Al'] };
const YEAR_HOURS = 8760;
const FAULT_WINDOW = 5;
const DAY_MS = 86_400_000;

interface Fault {
  readonly kind: FaultKind;
  /** The sampleId of the suspect sample (in the injected history). */
  readonly sampleId: string;
}

interface Plan {
  /** The seed of the fleet it belongs to. */
  readonly seed: number;
  readonly base: ComponentPlan;
  readonly change?: { readonly label: string; readonly spec: WearChange };
  readonly fault?: FaultKind;
}

export async function runQuiet(options: QuietOptions = {}): Promise<PartResult> {
  const firstSeed = options.seed ?? 1;
  const fleetSeeds = Array.from({ length: options.fleets ?? 1 }, (_, f) => firstSeed + f);
  const perKind = options.componentsPerKind ?? 150;
  const samples = options.samples ?? 100;
  const groupSize = options.groupSize ?? 25;
  const log = options.log ?? (() => {});
  const config = parseConfig(options.configText ?? '', options.configText === undefined ? 'built-in defaults' : 'configuration under test');

  const plans: Plan[] = [];
  for (const seed of fleetSeeds) {
    for (const kindName of ['gearbox', 'engine'] as const) {
      const kind = FLEET_KINDS[kindName];
      for (let i = 0; i < perKind; i++) {
        // With several fleets, each has groups of its own (unit names already carry the fleet's seed).
        const fleet = fleetSeeds.length > 1 ? `fleet${seed}-` : '';
        const base: ComponentPlan = { kind, fleetSeed: seed, index: i, group: `${fleet}${kindName === 'gearbox' ? 'gearboxes' : 'engines'}-${String(Math.floor(i / groupSize) + 1).padStart(2, '0')}`, samples };
        const pick = seededRandom(mix(seed, kindName === 'gearbox' ? 11 : 12, i));
        const role = i % 3;
        if (role === 1) {
          const c = CHANGE_KINDS[Math.floor(i / 3) % CHANGE_KINDS.length]!;
          const metals = CHANGED_METALS[kindName];
          const measurand = metals[Math.floor(i / 9) % metals.length]!;
          const twin = simulateUnit(base);
          const k = 15 + Math.floor(pick.next() * 25);
          const atHours = twin.hours[k - 1]! + pick.next() * (twin.hours[k]! - twin.hours[k - 1]!);
          plans.push({ seed, base, change: { label: c.label, spec: { measurand, shape: c.shape, factor: c.factor, atHours, ...(c.shape === 'ramp' && { rampHours: 1000 }) } } });
        } else if (role === 2) {
          plans.push({ seed, base, fault: FAULT_KINDS[Math.floor(i / 3) % FAULT_KINDS.length]! });
        } else {
          plans.push({ seed, base });
        }
      }
    }
  }

  const clean = plans.map((p) => simulateUnit(p.base));
  const faults = new Map<string, Fault>();
  const injected = plans.map((p, i) => {
    if (p.change !== undefined) return simulateUnit({ ...p.base, change: p.change.spec });
    if (p.fault !== undefined) {
      const donorKind = p.fault === 'other-unit-same-oil' ? p.base.kind.name : p.base.kind.name === 'gearbox' ? 'engine' : 'gearbox';
      const donor = clean.find((u, j) => j !== i && plans[j]!.seed === p.seed && u.kind === donorKind)!;
      // The index within the fleet, so that a fleet's faults do not depend on the fleets measured beside it.
      const r = injectFault(clean[i]!, p.fault, donor, seededRandom(mix(p.seed, 21, i - plans.findIndex((q) => q.seed === p.seed))));
      faults.set(clean[i]!.unit, r.fault);
      return { ...clean[i]!, events: r.events };
    }
    return clean[i]!;
  });

  const end = Math.max(...clean.flatMap((u) => u.events.map((e) => Date.parse(e.sampledAt))));
  const now = end + 60 * DAY_MS;
  log(`quiet: ${clean.length} components, ${clean.length * samples} results per run`);
  const t0 = performance.now();
  const cleanRun = await replayFleet(clean, config, now);
  log(`quiet: clean run ${((performance.now() - t0) / 1000).toFixed(1)} s`);
  const t1 = performance.now();
  const injectedRun = await replayFleet(injected, config, now);
  log(`quiet: injected run ${((performance.now() - t1) / 1000).toFixed(1)} s`);

  // 1. Healthy components: every component of the clean run.
  const componentYears = clean.reduce((sum, u) => sum + u.hours[u.hours.length - 1]! / YEAR_HOURS, 0);
  const perFamily = new Map<RuleFamily, number>(RULE_FAMILIES.map((f) => [f, 0]));
  let machine = 0;
  let sampling = 0;
  const noisy = new Set<string>();
  for (const inc of cleanRun.incidents) {
    if (inc.kind === 'sampling') sampling += 1;
    else machine += 1;
    noisy.add(`${inc.unit}/${inc.component}`);
    for (const f of openingFamilies(inc)) perFamily.set(f, perFamily.get(f)! + 1);
  }
  const per100 = (n: number) => (100 * n) / componentYears;
  // Where the healthy incidents come from: fleet kind, family (sampling: its check) and measurand of the opening findings.
  const kindOfUnit = new Map(clean.map((u) => [u.unit, u.kind]));
  const sources = new Map<string, number>();
  for (const inc of cleanRun.incidents) {
    for (const f of inc.evidence.length > 0 ? openingFindings(inc) : []) {
      const key = `${kindOfUnit.get(inc.unit)} ${f.rule}${f.check !== undefined ? `/${f.check}` : ''} ${f.measurand}`;
      sources.set(key, (sources.get(key) ?? 0) + 1);
    }
  }
  const byKind = (['gearbox', 'engine'] as const).map((k) => {
    const units = new Set(clean.filter((u) => u.kind === k).map((u) => u.unit));
    const years = clean.filter((u) => u.kind === k).reduce((sum, u) => sum + u.hours[u.hours.length - 1]! / YEAR_HOURS, 0);
    const incs = cleanRun.incidents.filter((i) => units.has(i.unit));
    return { kind: k, componentYears: years, machine: per100Of(incs.filter((i) => i.kind === 'machine').length, years), all: per100Of(incs.length, years) };
  });

  // 2a. Wear changes.
  const cleanSignatures = signaturesByUnitKeys(cleanRun.incidents);
  const injectedSignatures = signaturesByUnit(injectedRun.incidents);
  const delays = new Map<string, number[]>(CHANGE_KINDS.map((c) => [c.label, []]));
  const fleetFigures = new Map(fleetSeeds.map((f) => [f, { doublings: [] as number[], steps15: [] as number[], faults: 0, flagged: 0, wear: 0 }]));
  // False alarms per sample the change detectors may raise on a healthy component: all on the changed metal, or shared by the watched metals.
  const componentRate = (changeDesign(config.detection, config.population).riseShare * config.detection.budget.alarms) / samplesPerBudgetPeriod(config.detection.budget);
  const ceilingRates = [componentRate, componentRate / Math.max(1, config.detection.measurands.length)] as const;
  const ceilings = new Map<string, number[][]>();
  const ceilingByMetal = new Map<string, number[][]>();
  const byMetal = new Map<string, number[]>();
  plans.forEach((p, i) => {
    if (p.change === undefined) return;
    const u = injected[i]!;
    const { measurand, atHours, rampHours } = p.change.spec;
    // A step doubles the rate at once; a ramp reaches the doubling at its end. Delays count from the first sample
    // after the doubling is reached; a ramp caught while still rising counts as caught at that first sample.
    const first = u.hours.findIndex((h) => h > atHours + (rampHours ?? 0));
    const start = u.hours.findIndex((h) => h > atHours);
    const before = cleanSignatures.get(u.unit) ?? new Set<string>();
    const found = (injectedSignatures.get(u.unit) ?? []).filter((s) => s.measurand === measurand && s.rule !== 'sampling' && !before.has(s.key));
    const index = new Map(u.events.map((e, j) => [e.sampleId, j]));
    const at = Math.min(...found.map((s) => index.get(s.sampleId) ?? Infinity).filter((j) => j >= start));
    const delay = Number.isFinite(at) ? Math.max(1, at - first + 1) : Infinity;
    delays.get(p.change.label)!.push(delay);
    fleetFigures.get(p.seed)![p.change.spec.factor === 2 ? 'doublings' : 'steps15'].push(delay);
    const key = `${p.change.label} ${u.kind} ${measurand}`;
    byMetal.set(key, [...(byMetal.get(key) ?? []), delay]);
    // The best any detector could do on this change (detectionCeiling.ts), within the window its target is judged on.
    const window = p.change.spec.factor === 2 ? 5 : 15;
    const last = first + window - 1;
    const bound = (rate: number, rateKnown: boolean) => ceilingProbability(clean[i]!, p.base.kind, measurand, p.change!.spec, last, Math.min(0.5, window * rate), rateKnown);
    const bounds = [bound(ceilingRates[0], true), bound(ceilingRates[1], true), bound(ceilingRates[1], false)];
    ceilings.set(p.change.label, [...(ceilings.get(p.change.label) ?? []), bounds]);
    ceilingByMetal.set(key, [...(ceilingByMetal.get(key) ?? []), bounds]);
  });
  const changeRows = CHANGE_KINDS.map((c) => {
    const d = delays.get(c.label)!;
    return {
      change: c.label,
      n: d.length,
      median: median(d),
      within3: share(d, (x) => x <= 3),
      within5: share(d, (x) => x <= 5),
      within15: share(d, (x) => x <= 15),
      caught: share(d, Number.isFinite),
    };
  });
  const doublings = [...delays.get('×2 step')!, ...delays.get('×2 ramp (1000 h)')!];
  const meanBounds = (list: readonly number[][]) => [0, 1, 2].map((j) => list.reduce((a, b) => a + b[j]!, 0) / Math.max(1, list.length));
  const doublingCeiling = meanBounds([...(ceilings.get('×2 step') ?? []), ...(ceilings.get('×2 ramp (1000 h)') ?? [])]);
  const step15Ceiling = meanBounds(ceilings.get('×1.5 step') ?? []);

  // 2b. Sampling faults.
  const faultRows = new Map<FaultKind, { n: number; flagged: number; wear: number }>(FAULT_KINDS.map((k) => [k, { n: 0, flagged: 0, wear: 0 }]));
  for (const [i, p] of plans.entries()) {
    if (p.fault === undefined) continue;
    const u = injected[i]!;
    const fault = faults.get(u.unit)!;
    const row = faultRows.get(fault.kind)!;
    row.n += 1;
    const view = await componentView(injectedRun.store, injectedRun.store, config, { unit: u.unit, component: u.component });
    const step = view?.evaluation.steps.find((s) => s.sampleId === fault.sampleId);
    const flagged = step?.findings.some((f) => f.rule === 'sampling') === true;
    if (flagged) row.flagged += 1;
    const order = (view?.evaluation.history.samples ?? []).map((s) => s.sampleId);
    const from = order.indexOf(fault.sampleId);
    const window = new Set(order.slice(from, from + FAULT_WINDOW + 1));
    const before = cleanSignatures.get(u.unit) ?? new Set<string>();
    const wear = (injectedSignatures.get(u.unit) ?? []).some((s) => s.rule !== 'sampling' && window.has(s.sampleId) && !before.has(s.key));
    if (wear) row.wear += 1;
    if (TARGET_FAULTS.includes(fault.kind)) {
      const f = fleetFigures.get(p.seed)!;
      f.faults += 1;
      if (flagged) f.flagged += 1;
      if (wear) f.wear += 1;
    }
  }
  const targetFaults = TARGET_FAULTS.map((k) => faultRows.get(k)!);
  const faultN = targetFaults.reduce((s, r) => s + r.n, 0);
  const flaggedShare = targetFaults.reduce((s, r) => s + r.flagged, 0) / faultN;
  const wearShare = targetFaults.reduce((s, r) => s + r.wear, 0) / faultN;

  const totalAll = per100(machine + sampling);
  const doublingMedian = median(doublings);
  const doublingWithin5 = share(doublings, (x) => x <= 5);
  const step15 = changeRows[2]!.within15;
  const targets = {
    healthyAllFamilies: { value: round(totalAll), target: '≤ 20', met: totalAll <= 20 },
    doublingMedianSamples: { value: doublingMedian, target: '≤ 3', met: doublingMedian <= 3 },
    doublingWithin5: { value: round(doublingWithin5), target: '≥ 0.9', met: doublingWithin5 >= 0.9 },
    step15Within15: { value: round(step15), target: '≥ 0.8', met: step15 >= 0.8 },
    faultsFlagged: { value: round(flaggedShare), target: '≥ 0.8', met: flaggedShare >= 0.8 },
    faultsOpeningWearIncident: { value: round(wearShare), target: '≤ 0.05', met: wearShare <= 0.05 },
  };

  const rows: string[][] = [];
  rows.push(['healthy: all incidents per 100 component-years', fmt(totalAll), '≤ 20', mark(targets.healthyAllFamilies.met)]);
  rows.push(['healthy: machine (wear) incidents', fmt(per100(machine)), '', '']);
  rows.push(['healthy: sampling incidents', fmt(per100(sampling)), '', '']);
  for (const f of RULE_FAMILIES) rows.push([`  opened by ${f}`, fmt(per100(perFamily.get(f)!)), '', '']);
  for (const k of byKind) rows.push([`  ${k.kind === 'gearbox' ? 'gearboxes' : 'engines'} (${fmt(k.componentYears)} component-years): machine / all`, `${fmt(k.machine)} / ${fmt(k.all)}`, '', '']);
  rows.push(['healthy components with any incident', `${noisy.size} of ${clean.length}`, '', '']);
  for (const c of changeRows) {
    rows.push([`${c.change} (${c.n}): median samples / within 3 / 5 / 15 / caught`, `${fmt(c.median)} / ${pct(c.within3)} / ${pct(c.within5)} / ${pct(c.within15)} / ${pct(c.caught)}`, '', '']);
  }
  for (const [key, d] of [...byMetal].sort()) rows.push([`  ${key} (${d.length}): median / within 5 / 15`, `${fmt(median(d))} / ${pct(share(d, (x) => x <= 5))} / ${pct(share(d, (x) => x <= 15))}`, '', '']);
  rows.push(['×2 steps and ramps: median samples to incident', fmt(doublingMedian), '≤ 3', mark(targets.doublingMedianSamples.met)]);
  rows.push(['×2 steps and ramps: share within 5 samples', pct(doublingWithin5), '≥ 90 %', mark(targets.doublingWithin5.met)]);
  rows.push(['×1.5 steps: share within 15 samples', pct(step15), '≥ 80 %', mark(targets.step15Within15.met)]);
  const bounds = (b: readonly number[]) => `${pct(b[0]!)} / ${pct(b[1]!)} / ${pct(b[2]!)}`;
  rows.push(['  best possible (oracle told the rate, budget on the one metal / shared; learning the rate, shared): ×2 within 5', bounds(doublingCeiling), '', '']);
  rows.push(['  best possible (same three): ×1.5 within 15', bounds(step15Ceiling), '', '']);
  for (const k of FAULT_KINDS) {
    const r = faultRows.get(k)!;
    rows.push([`fault ${k} (${r.n}): flagged / wear incident`, `${pct(r.flagged / r.n)} / ${pct(r.wear / r.n)}`, '', TARGET_FAULTS.includes(k) ? '' : 'apart']);
  }
  rows.push(['faults flagged as sampling findings', pct(flaggedShare), '≥ 80 %', mark(targets.faultsFlagged.met)]);
  rows.push(['faults opening a wear incident', pct(wearShare), '≤ 5 %', mark(targets.faultsOpeningWearIncident.met)]);
  // The same targets fleet by fleet: how far one fleet's figures stray from the pooled ones.
  const byFleet = fleetSeeds.map((seed) => {
    const f = fleetFigures.get(seed)!;
    const units = new Set(clean.filter((_, i) => plans[i]!.seed === seed).map((u) => u.unit));
    const years = clean.filter((u) => units.has(u.unit)).reduce((sum, u) => sum + u.hours[u.hours.length - 1]! / YEAR_HOURS, 0);
    return {
      seed,
      healthyAll: per100Of(cleanRun.incidents.filter((i) => units.has(i.unit)).length, years),
      doublingMedian: median(f.doublings),
      doublingWithin5: share(f.doublings, (x) => x <= 5),
      step15Within15: share(f.steps15, (x) => x <= 15),
      faultsFlagged: f.flagged / f.faults,
      faultsOpeningWearIncident: f.wear / f.faults,
    };
  });
  if (byFleet.length > 1) {
    for (const f of byFleet) {
      rows.push([
        `  fleet seed ${f.seed}: healthy / ×2 median / within 5 / ×1.5 within 15 / faults flagged / wear`,
        `${fmt(f.healthyAll)} / ${fmt(f.doublingMedian)} / ${pct(f.doublingWithin5)} / ${pct(f.step15Within15)} / ${pct(f.faultsFlagged)} / ${pct(f.faultsOpeningWearIncident)}`,
        '',
        '',
      ]);
    }
  }

  return {
    name: 'quiet',
    json: {
      fleets: fleetSeeds,
      components: clean.length,
      samplesPerComponent: samples,
      groupSize,
      componentYears: round(componentYears),
      healthy: {
        per100ComponentYears: { all: round(totalAll), machine: round(per100(machine)), sampling: round(per100(sampling)) },
        byFamily: Object.fromEntries(RULE_FAMILIES.map((f) => [f, round(per100(perFamily.get(f)!))])),
        byKind: byKind.map((k) => ({ kind: k.kind, componentYears: round(k.componentYears), machine: round(k.machine), all: round(k.all) })),
        componentsWithIncidents: noisy.size,
        openedBy: Object.fromEntries([...sources].sort((a, b) => b[1] - a[1])),
      },
      changesByMetal: Object.fromEntries([...byMetal].sort().map(([k, d]) => [k, { n: d.length, median: round(median(d)), within5: round(share(d, (x) => x <= 5)), within15: round(share(d, (x) => x <= 15)) }])),
      ceiling: {
        falseAlarmsPerSample: { oneMetal: round(ceilingRates[0]), shared: round(ceilingRates[1]) },
        doublingsWithin5: { oneMetal: round(doublingCeiling[0]!), shared: round(doublingCeiling[1]!), sharedRateLearnt: round(doublingCeiling[2]!) },
        step15Within15: { oneMetal: round(step15Ceiling[0]!), shared: round(step15Ceiling[1]!), sharedRateLearnt: round(step15Ceiling[2]!) },
        byMetal: Object.fromEntries([...ceilingByMetal].sort().map(([k, list]) => [k, meanBounds(list).map((x) => round(x))])),
      },
      changes: changeRows.map((c) => ({ ...c, median: round(c.median), within3: round(c.within3), within5: round(c.within5), within15: round(c.within15), caught: round(c.caught) })),
      faults: Object.fromEntries(FAULT_KINDS.map((k) => [k, faultRows.get(k)])),
      targets,
      byFleet: byFleet.map((f) => Object.fromEntries(Object.entries(f).map(([k, v]) => [k, round(v)]))),
    },
    table: { columns: ['quiet (built-in defaults)', 'result', 'target', ''], rows },
    notes: [
      `${fleetSeeds.length === 1 ? 'one fleet' : `${fleetSeeds.length} fleets (seeds ${fleetSeeds.join(', ')}), pooled`}: ` +
        `${clean.length} components (${perKind} gearboxes, ${perKind} diesel engines per fleet) × ${samples} samples, groups of ${groupSize}, ${fmt(componentYears)} component-years; ` +
        'rate spread 40 %, lab noise 1 ppm + 5 %, "<1" below 1 ppm, drains with residual oil, top-ups, intervals 250 h ± 40 %',
      'through replayRecords (the path of replay and backtest) with an empty configuration; a component-year is 8760 operating hours',
      'best possible: an oracle knowing the variances, carry-overs and change time (detectionCeiling.ts), told the true rate or learning it from the readings; false alarms over the window = window × the change budget per sample, on the one metal or shared by the watched metals; a real detector does worse',
      `incidents per family: the families of the findings that opened each incident; faults: wear incident = a machine incident opened or escalated within ${FAULT_WINDOW} samples that the clean twin does not have`,
    ],
  };
}

function per100Of(n: number, years: number): number {
  return years > 0 ? (100 * n) / years : NaN;
}

function share(values: readonly number[], test: (x: number) => boolean): number {
  return values.length === 0 ? NaN : values.filter(test).length / values.length;
}

function pct(x: number): string {
  return Number.isFinite(x) ? `${fmt(100 * x)} %` : '–';
}

function mark(met: boolean): string {
  return met ? 'met' : 'MISSED';
}

interface Signature {
  readonly key: string;
  readonly sampleId: string;
  readonly measurand: string;
  readonly rule: RuleFamily;
}

/** The moments a machine or sampling incident was opened or escalated: a finding raised, or its severity changed. */
function signaturesByUnit(incidents: readonly Incident[]): Map<string, Signature[]> {
  const out = new Map<string, Signature[]>();
  for (const inc of incidents) {
    for (const e of inc.timeline) {
      if (e.kind !== 'finding' || e.change === 'cleared') continue;
      const s = { key: `${e.sampleId}|${e.measurand}|${e.rule}|${e.change}|${e.severity}`, sampleId: e.sampleId, measurand: e.measurand, rule: e.rule };
      out.set(inc.unit, [...(out.get(inc.unit) ?? []), s]);
    }
  }
  return out;
}

function signaturesByUnitKeys(incidents: readonly Incident[]): Map<string, Set<string>> {
  return new Map([...signaturesByUnit(incidents)].map(([u, list]) => [u, new Set(list.map((s) => s.key))]));
}

/** The findings raised at the sample that opened the incident (their rule, check and measurand). */
function openingFindings(inc: Incident): { rule: RuleFamily; check?: string; measurand: string }[] {
  const checks = new Map(inc.evidence.map((f) => [`${f.rule}|${f.measurand}`, f.check]));
  return inc.timeline.flatMap((e) =>
    e.kind === 'finding' && e.change === 'raised' && e.sampleId === inc.openedBySampleId
      ? [{ rule: e.rule, measurand: e.measurand, ...(e.rule === 'sampling' && { check: checks.get(`${e.rule}|${e.measurand}`) ?? (e.direction === 'down' ? 'rate-fall' : '?') }) }]
      : [],
  );
}

function openingFamilies(inc: Incident): Set<RuleFamily> {
  const out = new Set<RuleFamily>();
  for (const e of inc.timeline) if (e.kind === 'finding' && e.change === 'raised' && e.sampleId === inc.openedBySampleId) out.add(e.rule);
  return out;
}

interface FleetRun {
  readonly incidents: readonly Incident[];
  readonly store: Awaited<ReturnType<typeof replayRecords>>['store'];
}

async function replayFleet(units: readonly SimulatedUnit[], config: Config, now: number): Promise<FleetRun> {
  const events = units.flatMap((u) => u.events).sort((a, b) => compare(a.sampledAt, b.sampledAt) || compare(a.sampleId, b.sampleId));
  const records: SourceRecord[] = events.map((record, i) => ({ line: i + 1, record }));
  const outcome = await replayRecords(records, { config, now });
  if (outcome.rejected > 0) throw new Error(`quiet: ${outcome.rejected} invented records were rejected`);
  return { incidents: outcome.store.incidents().filter((i) => i.closed?.how !== 'withdrawn'), store: outcome.store };
}

function compare(a: string, b: string): number {
  return a < b ? -1 : a > b ? 1 : 0;
}

/**
 * One sampling fault in a copy of a component's history, at a sample between the 16th and the 80th that continues a
 * charge (no oil change at it, its predecessor on the same charge).
 */
export function injectFault(u: SimulatedUnit, kind: FaultKind, donor: SimulatedUnit, rng: Random): { events: ResultEvent[]; fault: Fault } {
  const events = u.events.map((e) => ({ ...e, readings: { ...e.readings } }));
  const last = Math.min(events.length - 2, 79);
  let k = 15 + Math.floor(rng.next() * Math.max(1, last - 15));
  while (k < last && events[k]!.oilChanged) k += 1;
  const e = events[k]!;
  const prev = events[k - 1]!;
  const kindSpec = FLEET_KINDS[u.kind];
  switch (kind) {
    case 'new-oil-bottle':
      e.readings = newOilReadings(kindSpec, rng);
      break;
    case 'oil-hours-back':
      e.oilHours = Math.round((prev.oilHours ?? 0) * rng.uniform(0.1, 0.7));
      break;
    case 'unit-hours-back':
      e.unitHours = Math.max(0, Math.round((prev.unitHours ?? 0) - rng.uniform(50, 2000)));
      break;
    case 'reading-drop': {
      const metal = 'Fe';
      e.readings[metal] = Math.round(u.trueLevels[k]![metal]! * rng.uniform(0.1, 0.4) * 10) / 10;
      break;
    }
    case 'duplicate-bottle': {
      // The bottle of the previous sample sent again under this sample's label.
      e.readings = { ...prev.readings };
      break;
    }
    case 'other-unit-other-oil':
    case 'other-unit-same-oil': {
      const other = donor.events[Math.min(k, donor.events.length - 1)]!;
      e.readings = { ...other.readings };
      break;
    }
  }
  return { events, fault: { kind, sampleId: e.sampleId } };
}
