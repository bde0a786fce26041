/**
 * Properties of the incident engine over random histories and operator actions (fast-check): delivery is
 * at-least-once, so re-applying anything already applied must change nothing; batching must not matter; every
 * effect key is unique; and the ISA-18.2 life cycle holds: an open incident that returned to normal is one
 * nobody has acknowledged yet (returned and acknowledged means closed).
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import type { Step } from '../../src/analysis/model.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { SEVERITIES, type Finding } from '../../src/domain/finding.ts';
import { applyAction } from '../../src/incidents/applyAction.ts';
import { applyEscalationCheck } from '../../src/incidents/applyEscalationCheck.ts';
import { applySteps } from '../../src/incidents/applySteps.ts';
import { emptyComponentIncidents, type ComponentIncidents, type IncidentEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';

const UNIT = 'U1';
const COMPONENT = 'engine';
const T0 = Date.parse('2025-01-01T00:00:00Z');
const HOUR = 3_600_000;

const rulesFor = (scope: 'component' | 'measurand') =>
  incidentRules(
    ConfigSchema.parse({
      incidents: { scope, returnAfterSamples: 2, reopenWithinSamples: 2 },
      channels: { email: { from: 'a@plant.example', smtp: { host: 'localhost' } }, webhooks: [{ name: 'ops', url: 'https://ops.example/', secrets: ['S'] }] },
      escalation: {
        policies: [
          {
            name: 'all',
            tiers: [
              { afterMinutes: 0, email: ['oncall@plant.example'], webhooks: ['ops'] },
              { afterMinutes: 60, email: ['lead@plant.example'] },
              { afterMinutes: 240, webhooks: ['ops'] },
            ],
            repeatMinutes: 120,
          },
        ],
      },
    }),
  );

const findingArb = fc.record({
  measurand: fc.constantFrom('Fe' as const, 'Cu' as const, 'Pb' as const),
  rule: fc.constantFrom('cusum' as const, 'limit' as const),
  severity: fc.constantFrom(...SEVERITIES),
});

type Op =
  | { kind: 'step'; gapHours: number; findings: { measurand: 'Fe' | 'Cu' | 'Pb'; rule: 'cusum' | 'limit'; severity: (typeof SEVERITIES)[number] }[]; quiet: boolean }
  | { kind: 'ack' | 'resolve' | 'shelve' | 'unshelve' | 'check'; gapHours: number; pick: number };

const opArb: fc.Arbitrary<Op> = fc.oneof(
  { weight: 5, arbitrary: fc.record({ kind: fc.constant('step' as const), gapHours: fc.integer({ min: 1, max: 500 }), findings: fc.uniqueArray(findingArb, { maxLength: 3, selector: (f) => `${f.measurand}:${f.rule}` }), quiet: fc.boolean() }) },
  { weight: 2, arbitrary: fc.record({ kind: fc.constantFrom('ack' as const, 'resolve' as const, 'shelve' as const, 'unshelve' as const, 'check' as const), gapHours: fc.integer({ min: 0, max: 6 }), pick: fc.nat() }) },
);

interface Run {
  state: ComponentIncidents;
  effects: IncidentEffect[];
  steps: Step[];
  now: Date;
}

function run(ops: Op[], scope: 'component' | 'measurand'): Run {
  const rules = rulesFor(scope);
  let state = emptyComponentIncidents(UNIT, COMPONENT);
  const effects: IncidentEffect[] = [];
  const steps: Step[] = [];
  let t = T0;
  ops.forEach((op, n) => {
    t += op.gapHours * HOUR;
    const now = new Date(t);
    if (op.kind === 'step') {
      const sampleId = `S${n}`;
      const sampledAt = new Date(t - HOUR).toISOString();
      const findings: Finding[] = op.findings.map((f) => ({ ...f, unit: UNIT, component: COMPONENT, group: 'g', disposition: 'incident', value: 1, basis: 'reading', sampleId, sampledAt, explanation: 'x' }));
      const s: Step = { sampleId, sampledAt, findings };
      steps.push(s);
      const r = applySteps(state, [s], { group: 'g', now, quietBefore: op.quiet ? new Date(t) : new Date(0), rules });
      state = r.state;
      effects.push(...r.effects);
      return;
    }
    const incidents = Object.values(state.incidents);
    if (incidents.length === 0) return;
    const inc = incidents[op.pick % incidents.length]!;
    try {
      const r =
        op.kind === 'check'
          ? applyEscalationCheck(state, { incidentId: inc.id, now }, rules)
          : op.kind === 'shelve'
            ? applyAction(state, { kind: 'shelve', incidentId: inc.id, by: 'op', reason: 'r', until: new Date(t + 5 * HOUR), now }, rules)
            : op.kind === 'resolve'
              ? applyAction(state, { kind: 'resolve', incidentId: inc.id, by: 'op', note: 'n', now }, rules)
              : applyAction(state, { kind: op.kind === 'ack' ? 'acknowledge' : 'unshelve', incidentId: inc.id, by: 'op', now }, rules);
      state = r.state;
      effects.push(...r.effects);
    } catch (e) {
      // Refused actions (closed, not shelved) are part of the game; anything else is a failure.
      if (!(e instanceof Error) || !/is closed|is not shelved/.test(e.message)) throw e;
    }
  });
  return { state, effects, steps, now: new Date(t) };
}

describe.each(['component', 'measurand'] as const)('incident engine properties (%s scope)', (scope) => {
  const rules = rulesFor(scope);

  it('re-applying the steps already applied changes nothing', () => {
    fc.assert(
      fc.property(fc.array(opArb, { maxLength: 40 }), (ops) => {
        const r = run(ops, scope);
        const ctx = { group: 'g', now: r.now, quietBefore: new Date(0), rules };
        // Time alone may change the state (a shelving that has run out ends at `now`); the steps must add nothing.
        const timeOnly = applySteps(r.state, [], ctx);
        const again = applySteps(r.state, r.steps, ctx);
        expect(again.effects).toEqual(timeOnly.effects);
        expect(again.state).toEqual(timeOnly.state);
      }),
      { numRuns: 300 },
    );
  });

  it('an unshelving in the same millisecond as its shelving starts a chain whose checks keep apart from the first one\'s', () => {
    const ops: Op[] = [
      { kind: 'step', gapHours: 1, findings: [{ measurand: 'Fe', rule: 'cusum', severity: 'watch' }], quiet: false },
      { kind: 'shelve', gapHours: 0, pick: 0 },
      { kind: 'unshelve', gapHours: 0, pick: 0 },
    ];
    const effects = run(ops, scope).effects;
    const checks = effects.filter((e) => e.kind === 'schedule-escalation' && e.reason === 'tier');
    // Both chains ask for tier 1 at the same instant: two checks, told apart.
    expect(checks).toHaveLength(2);
    expect(checks[0]!.key).not.toBe(checks[1]!.key);
    expect(new Set(effects.map((e) => e.key)).size).toBe(effects.length);
  });

  it('every effect key names one effect over a whole run', () => {
    fc.assert(
      fc.property(fc.array(opArb, { maxLength: 60 }), (ops) => {
        // A key is the effect's job id in the queues: two effects under one key would lose the second. The one repeat
        // allowed is the same effect asked for twice at the same instant (two early checks of one chain in the same
        // millisecond both schedule it again at its due time): the queue keeps one, which is what both asked for.
        const byKey = new Map<string, unknown>();
        for (const e of run(ops, scope).effects) {
          if (byKey.has(e.key)) expect(e).toEqual(byKey.get(e.key));
          else byKey.set(e.key, e);
        }
      }),
      { numRuns: 300 },
    );
  });

  it('two early checks of one chain in the same millisecond schedule it again once', () => {
    const ops: Op[] = [
      { kind: 'step', gapHours: 1, findings: [{ measurand: 'Fe', rule: 'cusum', severity: 'watch' }], quiet: false },
      { kind: 'check', gapHours: 0, pick: 0 },
      { kind: 'check', gapHours: 0, pick: 0 },
    ];
    const again = run(ops, scope).effects.filter((e) => e.kind === 'schedule-escalation' && e.key.includes(':early:'));
    expect(again).toHaveLength(2);
    expect(again[0]).toEqual(again[1]);
  });

  it('batching does not change the verdict: steps in chunks give the incidents all at once gives', () => {
    const stepOnly = fc.array(
      fc.record({ gapHours: fc.integer({ min: 1, max: 500 }), findings: fc.uniqueArray(findingArb, { maxLength: 3, selector: (f) => `${f.measurand}:${f.rule}` }) }),
      { maxLength: 30 },
    );
    fc.assert(
      fc.property(stepOnly, fc.array(fc.integer({ min: 1, max: 5 }), { minLength: 1, maxLength: 10 }), (items, chunks) => {
        let t = T0;
        const steps: Step[] = items.map((it, n) => {
          t += it.gapHours * HOUR;
          const sampleId = `S${n}`;
          const sampledAt = new Date(t).toISOString();
          return { sampleId, sampledAt, findings: it.findings.map((f) => ({ ...f, unit: UNIT, component: COMPONENT, group: 'g', disposition: 'incident' as const, value: 1, basis: 'reading', sampleId, sampledAt, explanation: 'x' })) };
        });
        const ctx = { group: 'g', now: new Date(t + HOUR), quietBefore: new Date(0), rules };
        const whole = applySteps(emptyComponentIncidents(UNIT, COMPONENT), steps, ctx);
        let state = emptyComponentIncidents(UNIT, COMPONENT);
        const effects: IncidentEffect[] = [];
        let i = 0;
        let c = 0;
        while (i < steps.length) {
          // Overlapping chunks, as a burst of redeliveries would produce.
          const size = chunks[c++ % chunks.length]!;
          const r = applySteps(state, steps.slice(Math.max(0, i - 1), i + size), ctx);
          state = r.state;
          effects.push(...r.effects);
          i += size;
        }
        // The verdict is the same; the annunciation tells the state each batch ends in, so what was told may differ.
        expect(verdictOf(state)).toEqual(verdictOf(whole.state));
      }),
      { numRuns: 300 },
    );
  });

  it('keeps the life cycle consistent', () => {
    fc.assert(
      fc.property(fc.array(opArb, { maxLength: 60 }), (ops) => {
        const r = run(ops, scope);
        for (const inc of Object.values(r.state.incidents)) {
          if (inc.closed === null && inc.alarm === 'returned') expect(inc.acknowledged).toBeNull();
          if (inc.closed !== null) {
            expect(inc.shelved).toBeNull();
            expect(inc.escalation.dueAt).toBeNull();
            if (inc.closed.how !== 'resolved') expect(inc.alarm).toBe('returned');
          }
          if (inc.closed === null && inc.alarm === 'active') expect(inc.activeFindings.length + inc.cleanSteps).toBeGreaterThan(0);
          // The one severity rule: an incident is as severe as the most severe finding of its evidence, never more or less.
          expect(inc.evidence.length).toBeGreaterThan(0);
          expect(inc.severity).toBe(SEVERITIES[Math.max(...inc.evidence.map((f) => SEVERITIES.indexOf(f.severity)))]);
          expect(inc.peakSeverity).toBe(SEVERITIES[Math.max(...inc.timeline.filter((t) => t.kind === 'finding' && t.change !== 'cleared').map((t) => SEVERITIES.indexOf((t as { severity: (typeof SEVERITIES)[number] }).severity)))]);
        }
        // Nothing is sent about a shelved incident.
        for (const e of r.effects) if (e.kind === 'notify') expect(e.incident.shelvedUntil).toBeUndefined();
      }),
      { numRuns: 300 },
    );
  });
});

/** The incidents without their annunciation (what was told to whom, when). */
function verdictOf(state: ComponentIncidents) {
  return Object.fromEntries(
    Object.entries(state.incidents).map(([k, i]) => {
      const { announced: _a, eventSeq: _e, escalation: _s, told: _t, notifications: _n, ...rest } = i;
      return [k, rest];
    }),
  );
}
