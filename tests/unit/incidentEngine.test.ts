/**
 * The pure incident engine against the alarm life cycle of ANSI/ISA-18.2-2016 and IEC 62682:2014 (state
 * diagram from memory): an alarm is active or returned to normal, acknowledged or not; a returned alarm that
 * nobody acknowledged stays on the list; returned and acknowledged, it leaves it; shelving suppresses
 * annunciation for a limited time; new evidence on an acknowledged alarm needs a fresh acknowledgement.
 */
import { describe, expect, it } from 'vitest';
import type { Step } from '../../src/analysis/model.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { InputError } from '../../src/domain/errors.ts';
import type { Finding, RuleFamily, Severity } from '../../src/domain/finding.ts';
import type { Measurand } from '../../src/domain/measurands.ts';
import { applyAction } from '../../src/incidents/applyAction.ts';
import { applyEscalationCheck } from '../../src/incidents/applyEscalationCheck.ts';
import { applySteps, type StepContext } from '../../src/incidents/applySteps.ts';
import { IncidentFold } from '../../src/incidents/incidentFold.ts';
import { IncidentConflictError, IncidentNotFoundError } from '../../src/incidents/errors.ts';
import { emptyComponentIncidents, type ComponentIncidents, type IncidentEffect, type NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules, type IncidentRules } from '../../src/incidents/policy.ts';

const UNIT = 'PS2-P3';
const COMPONENT = 'gearbox';
const T0 = Date.parse('2026-03-01T08:00:00Z');
const DAY = 86_400_000;
const MIN = 60_000;

function finding(measurand: Measurand, severity: Severity, rule: RuleFamily = 'cusum'): Omit<Finding, 'sampleId' | 'sampledAt'> {
  return { unit: UNIT, component: COMPONENT, group: 'gearboxes', measurand, rule, disposition: 'incident', severity, value: 6, threshold: 5, basis: 'cusum', explanation: `${measurand} ${rule}` };
}

function step(n: number, ...findings: Omit<Finding, 'sampleId' | 'sampledAt'>[]): Step {
  const sampleId = `LAB-${String(n).padStart(4, '0')}`;
  const sampledAt = new Date(T0 + n * 10 * DAY).toISOString();
  return { sampleId, sampledAt, findings: findings.map((f) => ({ ...f, sampleId, sampledAt })) };
}

/** Live operation: each sample arrives an hour after it was drawn. */
function liveAt(s: Step): Date {
  return new Date(Date.parse(s.sampledAt) + 3_600_000);
}

function rulesFrom(yaml: object): IncidentRules {
  return incidentRules(ConfigSchema.parse(yaml));
}

const RULES_CHANNELS = {
  email: { from: 'wearshift <alerts@plant.example>', smtp: { host: 'localhost' } },
  webhooks: [{ name: 'ops', url: 'https://ops.example/hooks', secrets: ['WEBHOOK_SECRET'] }],
};

/** One escalation policy for the gearboxes: tier 0 is the on-call engineer's e-mail and the ops webhook. */
function gearboxPolicy(laterTiers: object[], extra: object = {}): IncidentRules {
  return rulesFrom({
    channels: RULES_CHANNELS,
    escalation: { policies: [{ name: 'gearboxes', tiers: [{ afterMinutes: 0, email: ['oncall@plant.example'], webhooks: ['ops'] }, ...laterTiers], ...extra }] },
  });
}

const RULES = gearboxPolicy([{ afterMinutes: 30, email: ['supervisor@plant.example'] }], { repeatMinutes: 60 });

/** Tier 0 only: no escalation timers between samples that lie days apart. */
const TIER0_ONLY = gearboxPolicy([]);

function ctx(now: Date, rules: IncidentRules = RULES): StepContext {
  return { group: 'gearboxes', now, quietBefore: new Date(now.getTime() - 30 * DAY), rules };
}

function feed(state: ComponentIncidents, s: Step, rules: IncidentRules = RULES) {
  return applySteps(state, [s], ctx(liveAt(s), rules));
}

const notifies = (effects: readonly IncidentEffect[]) => effects.filter((e): e is NotifyEffect => e.kind === 'notify');
const only = (state: ComponentIncidents) => {
  const list = Object.values(state.incidents);
  expect(list).toHaveLength(1);
  return list[0]!;
};

describe('incident life cycle', () => {
  it('opens, updates silently, and notifies again only on new evidence', () => {
    let state = emptyComponentIncidents(UNIT, COMPONENT);
    const feed = (st: ComponentIncidents, s: Step) => applySteps(st, [s], ctx(liveAt(s), TIER0_ONLY));

    const opened = feed(state, step(1, finding('Fe', 'caution')));
    state = opened.state;
    const inc = only(state);
    expect(inc.id).toBe('PS2-P3/gearbox@LAB-0001');
    expect(inc.alarm).toBe('active');
    expect(inc.acknowledged).toBeNull();
    expect(notifies(opened.effects).map((e) => [e.type, e.channel, e.target, e.tier])).toEqual([
      ['wearshift.incident.opened', 'email', 'oncall@plant.example', 0],
      ['wearshift.incident.opened', 'webhook', 'ops', 0],
    ]);
    expect(notifies(opened.effects)[0]!.key).toBe('PS2-P3/gearbox@LAB-0001:1:email:0:oncall@plant.example');
    expect(opened.effects.filter((e) => e.kind === 'schedule-escalation')).toEqual([]);
    const withTiers = applySteps(emptyComponentIncidents(UNIT, COMPONENT), [step(1, finding('Fe', 'caution'))], ctx(liveAt(step(1))));
    const schedule = withTiers.effects.find((e) => e.kind === 'schedule-escalation');
    expect(schedule).toMatchObject({ tier: 1, at: new Date(liveAt(step(1)).getTime() + 30 * MIN).toISOString(), reason: 'tier' });

    // Lower severity, same measurand: recorded, nobody told.
    const lower = feed(state, step(2, finding('Fe', 'watch')));
    state = lower.state;
    expect(lower.effects).toEqual([]);
    expect(only(state).severity).toBe('watch');
    expect(only(state).timeline.at(-1)).toMatchObject({ kind: 'finding', change: 'severity-changed', previousSeverity: 'caution', severity: 'watch' });

    // Above the highest ever announced: new evidence.
    const rise = feed(state, step(3, finding('Fe', 'alarm')));
    state = rise.state;
    expect(notifies(rise.effects).map((e) => e.type)).toEqual(['wearshift.incident.updated', 'wearshift.incident.updated']);
    expect(notifies(rise.effects)[0]!.incident.reason).toContain('severity rose from caution to alarm');

    // Down and back up to a level already announced: nothing new.
    state = feed(state, step(4, finding('Fe', 'caution'))).state;
    const again = feed(state, step(5, finding('Fe', 'alarm')));
    state = again.state;
    expect(again.effects).toEqual([]);

    // Another measurand joins.
    const joined = feed(state, step(6, finding('Fe', 'alarm'), finding('Cu', 'watch', 'rate')));
    state = joined.state;
    expect(notifies(joined.effects)).toHaveLength(2);
    expect(notifies(joined.effects)[0]!.incident.reason).toContain('Cu joined');
    expect(notifies(joined.effects)[0]!.incident.findings.map((f) => f.measurand)).toEqual(['Fe', 'Cu']);
    expect(only(state).peakSeverity).toBe('alarm');
  });

  it('acknowledgement cancels escalation; new evidence withdraws it and notifies again', () => {
    let state = feed(emptyComponentIncidents(UNIT, COMPONENT), step(1, finding('Fe', 'caution'))).state;
    const id = only(state).id;
    const ack = applyAction(state, { kind: 'acknowledge', incidentId: id, by: 'R. Tanaka', note: 'sampling again', now: new Date(T0 + 10 * DAY + 2 * 3_600_000) }, RULES);
    state = ack.state;
    expect(ack.incident.acknowledged).toMatchObject({ by: 'R. Tanaka', note: 'sampling again' });
    expect(ack.effects.map((e) => e.kind)).toEqual(['cancel-escalations', 'notify', 'notify']);
    expect(notifies(ack.effects).every((e) => e.type === 'wearshift.incident.acknowledged')).toBe(true);

    // Acknowledging again changes nothing.
    const twice = applyAction(state, { kind: 'acknowledge', incidentId: id, by: 'someone else', now: new Date(T0 + 11 * DAY) }, RULES);
    expect(twice.effects).toEqual([]);
    expect(twice.state).toEqual(state);

    // The pending tier-1 check after the acknowledgement tells nobody.
    const check = applyEscalationCheck(state, { incidentId: id, now: new Date(T0 + 10 * DAY + 3_600_000 + 30 * MIN) }, RULES);
    expect(check.effects).toEqual([]);

    // Same evidence: still acknowledged, silent.
    const same = feed(state, step(2, finding('Fe', 'caution')));
    state = same.state;
    expect(same.effects).toEqual([]);
    expect(only(state).acknowledged).not.toBeNull();

    // New evidence: unacknowledged again, announced, a new escalation chain.
    const news = feed(state, step(3, finding('Fe', 'caution'), finding('Pb', 'watch')));
    state = news.state;
    expect(only(state).acknowledged).toBeNull();
    expect(only(state).timeline.some((t) => t.kind === 'unacknowledged')).toBe(true);
    expect(notifies(news.effects).map((e) => e.type)).toEqual(['wearshift.incident.updated', 'wearshift.incident.updated']);
    // The message says that the acknowledgement no longer holds, not only what is new.
    for (const n of notifies(news.effects)) expect(n.incident.reason).toMatch(/^new evidence: Pb joined.*; acknowledgement withdrawn, acknowledge again$/);
    expect(news.effects.some((e) => e.kind === 'schedule-escalation' && e.tier === 1)).toBe(true);
  });

  it('an acknowledgement withdrawn by a severity already announced before it still announces and escalates again', () => {
    // Alarm announced, then the severity falls to caution and the caution is acknowledged; the alarm comes back.
    // Nothing is new against what was ever announced, but the acknowledgement no longer covers the evidence: an
    // unacknowledged active alarm must not be left silent (ISA-18.2: a re-alarm is annunciated; from memory).
    let state = feed(emptyComponentIncidents(UNIT, COMPONENT), step(1, finding('Fe', 'alarm'))).state;
    state = feed(state, step(2, finding('Fe', 'caution'))).state;
    const id = only(state).id;
    state = applyAction(state, { kind: 'acknowledge', incidentId: id, by: 'R. Tanaka', now: new Date(T0 + 20 * DAY + 2 * 3_600_000) }, RULES).state;
    expect(only(state).acknowledged).toMatchObject({ severity: 'caution' });
    const back = feed(state, step(3, finding('Fe', 'alarm')));
    expect(only(back.state).acknowledged).toBeNull();
    expect(notifies(back.effects).map((e) => [e.type, e.tier])).toEqual([
      ['wearshift.incident.updated', 0],
      ['wearshift.incident.updated', 0],
    ]);
    expect(notifies(back.effects)[0]!.incident.reason).toMatch(/^acknowledgement withdrawn: new evidence: severity rose from caution to alarm; acknowledge again/);
    expect(back.effects.some((e) => e.kind === 'schedule-escalation' && e.tier === 1)).toBe(true);
    // Redelivered, the same step tells nobody twice.
    expect(feed(back.state, step(3, finding('Fe', 'alarm'))).effects).toEqual([]);
  });

  it('returns to normal after the configured clean samples; closes only once acknowledged', () => {
    let state = feed(emptyComponentIncidents(UNIT, COMPONENT), step(1, finding('Fe', 'alarm'))).state;
    const id = only(state).id;
    const first = feed(state, step(2));
    state = first.state;
    expect(only(state).alarm).toBe('active');
    expect(only(state).activeFindings).toEqual([]);
    expect(only(state).timeline.at(-1)).toMatchObject({ kind: 'finding', change: 'cleared', measurand: 'Fe' });

    const second = feed(state, step(3));
    state = second.state;
    expect(only(state).alarm).toBe('returned');
    expect(only(state).closed).toBeNull();
    // Nobody has acknowledged it: whoever was told hears of the return, by e-mail as well as by the webhook, and the
    // message says it still waits for acknowledgement.
    expect(notifies(second.effects).map((e) => [e.type, e.channel, e.target, e.tier])).toEqual([
      ['wearshift.incident.returned', 'email', 'oncall@plant.example', 0],
      ['wearshift.incident.returned', 'webhook', 'ops', 0],
    ]);
    expect(notifies(second.effects)[0]!.incident.reason).toBe('returned to normal at sample LAB-0003, after 2 samples without findings; still unacknowledged');

    // Returned but unacknowledged stays open through further clean samples.
    state = feed(state, step(4)).state;
    expect(only(state).closed).toBeNull();

    const ack = applyAction(state, { kind: 'acknowledge', incidentId: id, by: 'R. Tanaka', now: new Date(T0 + 41 * DAY) }, RULES);
    expect(ack.incident.closed).toMatchObject({ how: 'acknowledged-and-returned', by: 'R. Tanaka' });
    expect(notifies(ack.effects).map((e) => [e.type, e.channel])).toEqual([
      ['wearshift.incident.closed', 'email'],
      ['wearshift.incident.closed', 'webhook'],
    ]);
    expect(() => applyAction(ack.state, { kind: 'acknowledge', incidentId: id, by: 'x', now: new Date(T0 + 42 * DAY) }, RULES)).toThrow(IncidentConflictError);
  });

  it('an acknowledged incident closes when it returns to normal', () => {
    const rules = rulesFrom({ incidents: { returnAfterSamples: 3 } });
    let state = feed(emptyComponentIncidents(UNIT, COMPONENT), step(1, finding('Fe', 'alarm')), rules).state;
    state = applyAction(state, { kind: 'acknowledge', incidentId: only(state).id, by: 'R. Tanaka', now: new Date(T0 + 11 * DAY) }, rules).state;
    state = feed(state, step(2), rules).state;
    state = feed(state, step(3), rules).state;
    expect(only(state).alarm).toBe('active');
    state = feed(state, step(4), rules).state;
    expect(only(state)).toMatchObject({ alarm: 'returned', closed: { how: 'acknowledged-and-returned', at: step(4).sampledAt } });
  });

  it('reopens within the window instead of chattering; after it, a new incident opens', () => {
    let state = feed(emptyComponentIncidents(UNIT, COMPONENT), step(1, finding('Fe', 'alarm'))).state;
    const id = only(state).id;
    state = applyAction(state, { kind: 'acknowledge', incidentId: id, by: 'R. Tanaka', now: new Date(T0 + 11 * DAY) }, RULES).state;
    state = feed(state, step(2)).state;
    state = feed(state, step(3)).state;
    expect(only(state).closed).not.toBeNull();
    state = feed(state, step(4)).state;
    const back = feed(state, step(5, finding('Fe', 'alarm')));
    state = back.state;
    expect(only(state).id).toBe(id);
    expect(only(state).closed).toBeNull();
    expect(only(state).timeline.some((t) => t.kind === 'active-again' && t.reopened)).toBe(true);
    // A closed alarm that comes back is a new unacknowledged alarm situation: the old acknowledgement is withdrawn,
    // tier 0 hears of it and the escalation chain starts again (tests/unit/incident-reopen.test.ts).
    expect(only(state).acknowledged).toBeNull();
    expect(notifies(back.effects).map((e) => [e.type, e.tier])).toEqual([
      ['wearshift.incident.updated', 0],
      ['wearshift.incident.updated', 0],
    ]);

    // Acknowledged again and closed again, then more clean samples than reopenWithinSamples (3): the next finding is a
    // new incident.
    state = applyAction(state, { kind: 'acknowledge', incidentId: id, by: 'R. Tanaka', now: new Date(T0 + 51 * DAY) }, RULES).state;
    state = feed(state, step(6)).state;
    state = feed(state, step(7)).state;
    expect(only(state).closed).not.toBeNull();
    for (const n of [8, 9, 10]) state = feed(state, step(n)).state;
    const fresh = feed(state, step(11, finding('Fe', 'caution')));
    expect(only(fresh.state).id).toBe('PS2-P3/gearbox@LAB-0011');
    expect(notifies(fresh.effects)[0]!.type).toBe('wearshift.incident.opened');
  });

  it('a returned, unacknowledged incident turning active again is the same incident', () => {
    let state = feed(emptyComponentIncidents(UNIT, COMPONENT), step(1, finding('Fe', 'alarm'))).state;
    for (const n of [2, 3, 4, 5, 6, 7]) state = feed(state, step(n)).state;
    const back = feed(state, step(8, finding('Fe', 'caution')));
    expect(only(back.state)).toMatchObject({ id: 'PS2-P3/gearbox@LAB-0001', alarm: 'active' });
    expect(only(back.state).timeline.filter((t) => t.kind === 'active-again')).toMatchObject([{ reopened: false }]);
  });

  it('redelivered steps change nothing and emit nothing', () => {
    const steps = [step(1, finding('Fe', 'caution')), step(2, finding('Fe', 'alarm')), step(3), step(4)];
    const now = new Date(T0 + 50 * DAY);
    const once = applySteps(emptyComponentIncidents(UNIT, COMPONENT), steps, ctx(now));
    const twice = applySteps(once.state, steps, ctx(now));
    expect(twice.effects).toEqual([]);
    expect(twice.state).toEqual(once.state);
    const partial = applySteps(once.state, steps.slice(1, 3), ctx(new Date(now.getTime() + DAY)));
    expect(partial.effects).toEqual([]);
    expect(partial.state).toEqual(once.state);
  });

  it('a re-evaluation that changes the last step (folded again from the checkpoint before it) is told once, as new evidence', () => {
    const now = new Date(T0 + 20 * DAY);
    const base = emptyComponentIncidents(UNIT, COMPONENT);
    const first = applySteps(base, [step(1, finding('Fe', 'caution'))], ctx(now));
    const revised = step(1, finding('Fe', 'alarm'));
    const fold = new IncidentFold(base, first.state, ctx(now));
    fold.step(revised);
    const r = fold.finish();
    expect(only(r.state).severity).toBe('alarm');
    expect(only(r.state).id).toBe(only(first.state).id);
    expect(notifies(r.effects).map((e) => e.type)).toEqual(['wearshift.incident.updated', 'wearshift.incident.updated']);
    // Folding the same steps again tells nothing more.
    const again = new IncidentFold(base, r.state, ctx(now));
    again.step(revised);
    expect(again.finish().effects).toEqual([]);
  });

  it('quiet backfill records incidents but tells nobody; the first live finding announces', () => {
    const now = new Date(T0 + 400 * DAY);
    const old = [step(1, finding('Fe', 'alarm')), step(2, finding('Fe', 'alarm'))];
    const backfill = applySteps(emptyComponentIncidents(UNIT, COMPONENT), old, ctx(now));
    expect(backfill.effects).toEqual([]);
    expect(only(backfill.state).severity).toBe('alarm');
    expect(only(backfill.state).notifications).toEqual([]);

    const live = step(39, finding('Fe', 'alarm'));
    const r = applySteps(backfill.state, [live], ctx(liveAt(live)));
    expect(notifies(r.effects)[0]).toMatchObject({ type: 'wearshift.incident.opened', incidentId: 'PS2-P3/gearbox@LAB-0001' });
  });

  it('an incident seen only in quiet backfill closes when it returns to normal', () => {
    const now = new Date(T0 + 400 * DAY);
    const r = applySteps(emptyComponentIncidents(UNIT, COMPONENT), [step(1, finding('Fe', 'alarm')), step(2), step(3)], ctx(now));
    expect(r.effects).toEqual([]);
    expect(only(r.state).closed).toMatchObject({ how: 'returned-unannounced' });
  });

  it('shelved incidents record evidence but send nothing until the shelving ends', () => {
    let state = feed(emptyComponentIncidents(UNIT, COMPONENT), step(1, finding('Fe', 'caution'))).state;
    const id = only(state).id;
    const shelvedAt = new Date(T0 + 10 * DAY + 2 * 3_600_000);
    const until = new Date(T0 + 13 * DAY);
    const shelve = applyAction(state, { kind: 'shelve', incidentId: id, by: 'R. Tanaka', until, reason: 'oil change booked', now: shelvedAt }, RULES);
    state = shelve.state;
    expect(shelve.effects.map((e) => e.kind)).toEqual(['cancel-escalations', 'schedule-escalation']);
    expect(shelve.effects[1]).toMatchObject({ reason: 'shelving-ends', at: until.toISOString() });

    // Severity rises while shelved: recorded, not sent.
    const during = applySteps(state, [step(1.1, finding('Fe', 'alarm'))], ctx(new Date(T0 + 12 * DAY)));
    state = during.state;
    expect(during.effects).toEqual([]);
    expect(only(state).severity).toBe('alarm');

    // The check at the end of shelving lifts it and announces what was held back.
    const end = applyEscalationCheck(state, { incidentId: id, now: until }, RULES);
    expect(only(end.state).shelved).toBeNull();
    expect(only(end.state).timeline.some((t) => t.kind === 'unshelved')).toBe(true);
    expect(notifies(end.effects).map((e) => e.type)).toEqual(['wearshift.incident.updated', 'wearshift.incident.updated']);
    expect(notifies(end.effects)[0]!.incident.reason).toContain('severity rose from caution to alarm');
  });

  it('an unacknowledged incident active again after a return to normal is told so, and its escalation goes on', () => {
    // Tier 1 falls due while the incident has returned to normal: its check finds nothing to tell then.
    const rules = gearboxPolicy([{ afterMinutes: 25 * 24 * 60, email: ['supervisor@plant.example'] }]);
    const s1 = step(1, finding('Fe', 'alarm'));
    let state = feed(emptyComponentIncidents(UNIT, COMPONENT), s1, rules).state;
    const id = only(state).id;
    state = feed(state, step(2), rules).state;
    state = feed(state, step(3), rules).state;
    expect(only(state).alarm).toBe('returned');
    const check = applyEscalationCheck(state, { incidentId: id, now: new Date(liveAt(s1).getTime() + 25 * DAY) }, rules);
    expect(check.effects).toEqual([]);
    state = check.state;

    const back = feed(state, step(4, finding('Fe', 'alarm')), rules);
    expect(only(back.state).alarm).toBe('active');
    const sent = notifies(back.effects).map((e) => [e.type, e.target, e.tier]);
    expect(sent).toEqual([
      ['wearshift.incident.updated', 'oncall@plant.example', 0],
      ['wearshift.incident.updated', 'ops', 0],
      ['wearshift.incident.escalated', 'supervisor@plant.example', 1],
    ]);
    expect(only(back.state).notifications.filter((n) => n.type === 'wearshift.incident.updated').map((n) => n.reason)).toEqual(['active again after it had returned to normal; still not acknowledged']);
    // Told once: the next sample of the same evidence is silent.
    expect(notifies(feed(back.state, step(5, finding('Fe', 'alarm')), rules).effects)).toEqual([]);
  });

  it('escalates tier by tier while unacknowledged, reminds, and ignores stale or repeated checks', () => {
    const s1 = step(1, finding('Fe', 'alarm'));
    const announcedAt = liveAt(s1).getTime();
    let state = feed(emptyComponentIncidents(UNIT, COMPONENT), s1).state;
    const id = only(state).id;

    // Too early (beyond the clock-skew tolerance): nobody is told, and the check is scheduled again for its time.
    const early = applyEscalationCheck(state, { incidentId: id, now: new Date(announcedAt + 10 * MIN) }, RULES);
    expect(notifies(early.effects)).toEqual([]);
    expect(early.effects).toMatchObject([{ kind: 'schedule-escalation', tier: 1, reason: 'tier', at: new Date(announcedAt + 30 * MIN).toISOString() }]);

    const tier1 = applyEscalationCheck(state, { incidentId: id, now: new Date(announcedAt + 30 * MIN) }, RULES);
    state = tier1.state;
    expect(notifies(tier1.effects).map((e) => [e.type, e.target, e.tier])).toEqual([['wearshift.incident.escalated', 'supervisor@plant.example', 1]]);
    expect(tier1.effects.find((e) => e.kind === 'schedule-escalation')).toMatchObject({ reason: 'repeat', tier: 1, at: new Date(announcedAt + 90 * MIN).toISOString() });

    // The same check delivered twice (as the escalate worker passes it on: its tier, reason and due time) tells nobody twice.
    const tier1Check = { incidentId: id, tier: 1, reason: 'tier', dueAt: new Date(announcedAt + 30 * MIN).toISOString() } as const;
    expect(applyEscalationCheck(state, { ...tier1Check, now: new Date(announcedAt + 30 * MIN + 5) }, RULES).effects).toEqual([]);

    const reminder = applyEscalationCheck(state, { incidentId: id, now: new Date(announcedAt + 90 * MIN) }, RULES);
    const keys = notifies(reminder.effects).map((e) => e.key);
    expect(keys).toHaveLength(1);
    expect(keys[0]).not.toBe(notifies(tier1.effects)[0]!.key);

    // A check for an incident the component no longer holds is a stale job: nothing happens.
    expect(applyEscalationCheck(state, { incidentId: 'nope', now: new Date(announcedAt) }, RULES).effects).toEqual([]);
  });

  it('sends nothing when no policy matches, and says so in the timeline', () => {
    const rules = rulesFrom({});
    const r = feed(emptyComponentIncidents(UNIT, COMPONENT), step(1, finding('Fe', 'alarm')), rules);
    expect(r.effects).toEqual([]);
    expect(only(r.state).notifications.at(-1)).toMatchObject({ kind: 'notified', targets: [] });
    expect(only(r.state).notifications.at(-1)!.reason).toContain('no escalation policy matches');
  });

  it('picks the first policy whose groups and severities match', () => {
    const rules = rulesFrom({
      channels: { email: { from: 'a@plant.example', smtp: { host: 'localhost' } } },
      escalation: {
        policies: [
          { name: 'alarms', match: { severities: ['alarm'] }, tiers: [{ afterMinutes: 0, email: ['alarm@plant.example'] }] },
          { name: 'rest', match: { groups: ['gearboxes'] }, tiers: [{ afterMinutes: 0, email: ['rest@plant.example'] }] },
        ],
      },
    });
    const watch = feed(emptyComponentIncidents(UNIT, COMPONENT), step(1, finding('Fe', 'watch')), rules);
    expect(notifies(watch.effects).map((e) => e.target)).toEqual(['rest@plant.example']);
    const alarm = feed(watch.state, step(2, finding('Fe', 'alarm')), rules);
    expect(notifies(alarm.effects).map((e) => [e.type, e.target])).toEqual([['wearshift.incident.updated', 'alarm@plant.example']]);
  });

  it('per-measurand scope keeps one incident per measurand', () => {
    const rules = rulesFrom({ incidents: { scope: 'measurand' } });
    const r = applySteps(
      emptyComponentIncidents(UNIT, COMPONENT),
      [step(1, finding('Fe', 'caution')), step(2, finding('Fe', 'caution'), finding('Cu', 'alarm')), step(3, finding('Cu', 'alarm')), step(4, finding('Cu', 'alarm'))],
      ctx(new Date(T0 + 45 * DAY), rules),
    );
    const byId = Object.fromEntries(Object.values(r.state.incidents).map((i) => [i.id, i]));
    expect(Object.keys(byId).sort()).toEqual(['PS2-P3/gearbox/Cu@LAB-0002', 'PS2-P3/gearbox/Fe@LAB-0001']);
    expect(byId['PS2-P3/gearbox/Fe@LAB-0001']).toMatchObject({ alarm: 'returned', measurand: 'Fe' });
    expect(byId['PS2-P3/gearbox/Cu@LAB-0002']).toMatchObject({ alarm: 'active', severity: 'alarm' });
  });
});

describe('action errors', () => {
  const state = feed(emptyComponentIncidents(UNIT, COMPONENT), step(1, finding('Fe', 'caution'))).state;
  const id = only(state).id;
  const now = new Date(T0 + 11 * DAY);

  it('names the missing or wrong field', () => {
    expect(() => applyAction(state, { kind: 'resolve', incidentId: id, by: 'R. Tanaka', note: ' ', now }, RULES)).toThrow(/note: required/);
    expect(() => applyAction(state, { kind: 'shelve', incidentId: id, by: 'R. Tanaka', until: new Date(now.getTime() + DAY), reason: '', now }, RULES)).toThrow(
      /reason: required/,
    );
    expect(() => applyAction(state, { kind: 'shelve', incidentId: id, by: 'R. Tanaka', until: new Date(now.getTime() - 1), reason: 'x', now }, RULES)).toThrow(
      /until: .* is not in the future/,
    );
    expect(() => applyAction(state, { kind: 'shelve', incidentId: id, by: 'R. Tanaka', until: new Date(now.getTime() + 8 * DAY), reason: 'x', now }, RULES)).toThrow(
      /limited to 168 h/,
    );
    expect(() => applyAction(state, { kind: 'acknowledge', incidentId: id, by: '', now }, RULES)).toThrow(/by: required/);
    expect(() => applyAction(state, { kind: 'acknowledge', incidentId: id, by: 'a\nb', now }, RULES)).toThrow(/by: must be one line/);
    expect(() => applyAction(state, { kind: 'unshelve', incidentId: id, by: 'R. Tanaka', now }, RULES)).toThrow(IncidentConflictError);
    expect(() => applyAction(state, { kind: 'acknowledge', incidentId: 'PS2-P3/gearbox@LAB-9999', by: 'x', now }, RULES)).toThrow(IncidentNotFoundError);
    expect(new IncidentNotFoundError('x')).toBeInstanceOf(InputError);
  });

  it('resolves with a note, tells everyone told so far, and refuses a second resolve', () => {
    const r = applyAction(state, { kind: 'resolve', incidentId: id, by: 'R. Tanaka', note: 'sample bottle contaminated; resampled clean', now }, RULES);
    expect(r.incident.closed).toMatchObject({ how: 'resolved', note: 'sample bottle contaminated; resampled clean' });
    expect(r.effects.map((e) => e.kind)).toEqual(['cancel-escalations', 'notify', 'notify']);
    expect(() => applyAction(r.state, { kind: 'resolve', incidentId: id, by: 'x', note: 'again', now }, RULES)).toThrow(IncidentConflictError);
    // Notes stay possible after the closing: the root cause is often found later.
    const noted = applyAction(r.state, { kind: 'note', incidentId: id, by: 'R. Tanaka', note: 'lab confirmed', now }, RULES);
    expect(noted.incident.timeline.at(-1)).toMatchObject({ kind: 'note', note: 'lab confirmed' });
  });
});

describe('the acknowledgement page summary', () => {
  it('names the most severe finding as what changed, as the board, e-mail and API list the evidence', async () => {
    const { ackSummary } = await import('../../src/http/server.ts');
    // The evidence as recorded lists the caution first; the alarm sets the incident's severity.
    const state = feed(emptyComponentIncidents(UNIT, COMPONENT), step(1, finding('K', 'caution', 'limit'), finding('water', 'alarm', 'condition'))).state;
    const incident = only(state);
    expect(incident.severity).toBe('alarm');
    expect(ackSummary(incident, 'UTC')).toMatchObject({ severity: 'alarm', whatChanged: 'water condition' });
  });
});
