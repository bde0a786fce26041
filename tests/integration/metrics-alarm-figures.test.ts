/**
 * `/metrics` exposes the live alarm-management key figures (ISA-18.2 / IEC 62682, EEMUA 191; definitions in
 * src/incidents/alarmFigures.ts) read from a real private Redis: incidents written by the incident store itself,
 * components registered by the result store, the clock injected. The expected values are worked out from the
 * incidents' sample dates below; the process test checks that `wearshift serve` wires the gauges.
 */
import Fastify, { type FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Step } from '../../src/analysis/model.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { parseResultEvent } from '../../src/domain/event.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { metricsRoute } from '../../src/http/metrics.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { tierZeroResponders } from '../../src/incidents/responders.ts';
import { Partitions } from '../../src/redis/keys.ts';
import { readRecentIncidents } from '../../src/redis/recentIncidents.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { registerAlarmGauges } from '../../src/runtime/alarmGauges.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { startCli } from '../helpers/cli.ts';
import { freePort, startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';

const DAY = 86_400_000;
/** A Thursday. */
const NOW = Date.parse('2026-04-02T10:00:00Z');
const ago = (days: number) => new Date(NOW - days * DAY).toISOString();
const PREFIX = '{alarm-metrics}';

const config = ConfigSchema.parse({
  channels: { email: { from: 'wearshift <alerts@plant.example>', smtp: { host: 'localhost' } } },
  escalation: { policies: [{ name: 'all', tiers: [{ afterMinutes: 0, email: ['oncall@plant.example'] }, { afterMinutes: 60, email: ['lead@plant.example'] }] }] },
  alarmFigures: { liveWindowDays: 30, standingAfterDays: 30, staleAfterDays: 7, chatteringWithinDays: 30, refreshSeconds: 60 },
});

function step(unit: string, n: number, daysAgo: number, rule: Finding['rule'] | null): Step {
  const sampledAt = ago(daysAgo);
  const sampleId = `${unit}-${n}`;
  const findings: Finding[] =
    rule === null
      ? []
      : [{ unit, component: 'gearbox', group: 'gearboxes', measurand: 'Fe', rule, disposition: 'incident', severity: 'caution', value: 7, threshold: 5, basis: rule, direction: 'up', sampleId, sampledAt, explanation: 'Fe wear rate shifted up' }];
  return { sampleId, sampledAt, findings };
}

/** Parses one gauge's samples from the Prometheus text: label set (as written) → value. */
function gauge(text: string, name: string): Map<string, number> {
  const out = new Map<string, number>();
  for (const line of text.split('\n')) {
    const m = new RegExp(`^${name}(\\{[^}]*\\})? (\\S+)$`).exec(line);
    if (m) out.set(m[1] ?? '', Number(m[2]));
  }
  return out;
}

let server: RedisServer;
let app: FastifyInstance;
let clock = NOW;

beforeAll(async () => {
  server = await startRedisServer();
  const redis = server.client();
  const incidents = new RedisIncidents(redis, { rules: incidentRules(config), prefix: PREFIX });
  const store = new RedisStore(redis, { prefix: PREFIX, config });
  const input = { group: 'gearboxes', now: new Date(NOW), quietBefore: new Date(0) };
  // U1: opened 40 days ago, still active and unacknowledged: standing and stale; its opening lies before the window.
  await incidents.applySteps({ unit: 'U1', component: 'gearbox' }, [step('U1', 1, 40, 'cusum'), step('U1', 2, 20, 'cusum')], input);
  // U2: opened a day ago (Wednesday): neither standing nor stale.
  await incidents.applySteps({ unit: 'U2', component: 'gearbox' }, [step('U2', 1, 1, 'limit')], input);
  // U3: opened 20 days ago, back to normal after two clean samples (12 days ago), active again 2 days ago (Tuesday): chattering.
  await incidents.applySteps({ unit: 'U3', component: 'gearbox' }, [step('U3', 1, 20, 'ewma'), step('U3', 2, 16, null), step('U3', 3, 12, null), step('U3', 4, 2, 'ewma')], input);
  // U5: opened 25 days ago by a result that arrived as quiet backfill: on record, nobody was told.
  await incidents.applySteps({ unit: 'U5', component: 'gearbox' }, [step('U5', 1, 25, 'rate')], { ...input, quietBefore: new Date(NOW) });
  // Five components on record: the four above and one without incidents.
  for (const unit of ['U1', 'U2', 'U3', 'U4', 'U5']) {
    const parsed = parseResultEvent({ sampleId: `${unit}-0`, unit, component: 'gearbox', sampledAt: ago(50), readings: { Fe: 10 } });
    if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
    await store.store(parsed.sample, 'gearboxes', NOW - 50 * DAY);
  }
  const metrics = createMetrics({ defaultMetrics: false });
  registerAlarmGauges(metrics.registry, {
    source: (o) => readRecentIncidents(redis, new Partitions(PREFIX, 1), o),
    config: config.alarmFigures,
    responders: tierZeroResponders(config.escalation.policies),
    now: () => clock,
  });
  app = Fastify();
  await app.register(metricsRoute, { tokens: accessTokensFromEnv(process.env), metrics, public: true });
  await app.ready();
}, 60_000);

afterAll(async () => {
  await app?.close();
  await server?.dispose();
});

describe('/metrics: live alarm figures from the incident store', () => {
  it('exposes load per tier-0 responder, standing, stale, chattering, open, per-family rates and bad actors', async () => {
    const res = await app.inject({ method: 'GET', url: '/metrics' });
    expect(res.statusCode).toBe(200);
    const text = res.body;
    expect(gauge(text, 'wearshift_alarm_figures_up').get('')).toBe(1);
    expect(gauge(text, 'wearshift_alarm_figures_incidents_read').get('')).toBe(4);
    expect(gauge(text, 'wearshift_alarm_figures_truncated').get('')).toBe(0);
    // In the 30-day window: U2 opened, U3 opened and active again, U5 opened (quietly); U1 opened before it.
    expect(gauge(text, 'wearshift_alarm_annunciations').get('')).toBe(4);
    expect(gauge(text, 'wearshift_alarm_quiet_annunciations').get('')).toBe(1);
    const load = gauge(text, 'wearshift_alarm_responder_annunciations');
    expect(load.get('{responder="email:oncall@plant.example",period="day",stat="average"}')).toBeCloseTo(3 / 30, 4);
    expect(load.get('{responder="email:oncall@plant.example",period="day",stat="peak"}')).toBe(1);
    // Tuesday and Wednesday of the same Monday-to-Sunday week.
    expect(load.get('{responder="email:oncall@plant.example",period="week",stat="peak"}')).toBe(2);
    expect(load.get('{responder="email:oncall@plant.example",period="week",stat="average"}')).toBeCloseTo(3 / (30 / 7), 4);
    expect([...load.keys()].some((k) => k.includes('lead@plant.example'))).toBe(false);
    expect(gauge(text, 'wearshift_alarm_unrouted_annunciations').get('')).toBe(0);
    expect(gauge(text, 'wearshift_alarm_incidents_open').get('')).toBe(4);
    expect(gauge(text, 'wearshift_alarm_incidents_standing').get('')).toBe(1);
    // U1 (40 days) and U3 (unacknowledged since 20 days); U5 asked nobody.
    expect(gauge(text, 'wearshift_alarm_incidents_stale').get('')).toBe(2);
    expect(gauge(text, 'wearshift_alarm_incidents_chattering').get('')).toBe(1);
    const opened = gauge(text, 'wearshift_alarm_incidents_opened');
    expect([opened.get('{family="all"}'), opened.get('{family="ewma"}'), opened.get('{family="limit"}'), opened.get('{family="rate"}'), opened.get('{family="cusum"}')]).toEqual([3, 1, 1, 1, 0]);
    // 3 incidents over 5 components watched for 30 days: 3 · 100 / (5 · 30 / 365.25).
    expect(gauge(text, 'wearshift_alarm_incidents_per_100_component_years').get('{family="all"}')).toBeCloseTo((3 * 100) / ((5 * 30) / 365.25), 3);
    const actors = gauge(text, 'wearshift_alarm_bad_actor_annunciations');
    expect(actors.get('{unit="U3",component="gearbox"}')).toBe(2);
    expect(actors.get('{unit="U2",component="gearbox"}')).toBe(1);
    expect(gauge(text, 'wearshift_alarm_bad_actor_pair_incidents').get('{rule="ewma",measurand="Fe"}')).toBe(1);
  });

  it('keeps the last figures within refreshSeconds and computes again after it', async () => {
    clock = NOW + 30_000;
    const soon = await app.inject({ method: 'GET', url: '/metrics' });
    expect(gauge(soon.body, 'wearshift_alarm_incidents_stale').get('')).toBe(2);
    clock = NOW + 10 * DAY; // U2 has now waited 11 days unacknowledged
    const later = await app.inject({ method: 'GET', url: '/metrics' });
    expect(gauge(later.body, 'wearshift_alarm_incidents_stale').get('')).toBe(3);
    // U1 and U5 (active for 35 days, told or not); U3 is active again for 12 days, U2 for 11.
    expect(gauge(later.body, 'wearshift_alarm_incidents_standing').get('')).toBe(2);
    // U3's opening (30 days before the clock) is still in the window, U2's and U3's later annunciations too; U5's not.
    expect(gauge(later.body, 'wearshift_alarm_annunciations').get('')).toBe(3);
  });
});

describe('/metrics: bounded reads', () => {
  it('reads at most maxIncidents, open ones first, and says so', async () => {
    const redis = server.client();
    const metrics = createMetrics({ defaultMetrics: false });
    registerAlarmGauges(metrics.registry, {
      source: (o) => readRecentIncidents(redis, new Partitions(PREFIX, 1), o),
      config: { ...config.alarmFigures, maxIncidents: 2 },
      responders: tierZeroResponders(config.escalation.policies),
      now: () => NOW,
    });
    const text = await metrics.registry.metrics();
    expect(gauge(text, 'wearshift_alarm_figures_incidents_read').get('')).toBe(2);
    expect(gauge(text, 'wearshift_alarm_figures_truncated').get('')).toBe(1);
  });

  it('says the figures are down when the store cannot be read, and reads again at the next scrape', async () => {
    const metrics = createMetrics({ defaultMetrics: false });
    let reads = 0;
    registerAlarmGauges(metrics.registry, {
      source: () => {
        reads += 1;
        return Promise.reject(new Error('connection refused'));
      },
      config: config.alarmFigures,
      responders: tierZeroResponders([]),
      now: () => NOW,
    });
    const text = await metrics.registry.metrics();
    expect(gauge(text, 'wearshift_alarm_figures_up').get('')).toBe(0);
    expect(gauge(text, 'wearshift_alarm_incidents_open').get('')).toBeNaN();
    expect(gauge(text, 'wearshift_alarm_responder_annunciations').size).toBe(0);
    const before = reads;
    await metrics.registry.metrics();
    expect(reads).toBe(before + 1);
  });
});

describe('wearshift serve', () => {
  it('serves the alarm gauges on /metrics', async () => {
    const redis = await startRedisServer();
    const port = await freePort();
    const serve = startCli(['serve', '--port', String(port)], { REDIS_URL: redis.url, WEARSHIFT_METRICS_PUBLIC: '1', LOG_LEVEL: 'warn' });
    try {
      const deadline = Date.now() + 60_000;
      while ((await fetch(`http://127.0.0.1:${port}/readyz`).then((r) => r.status, () => 0)) !== 200) {
        if (Date.now() > deadline) throw new Error('wearshift serve did not get ready');
        await new Promise((resolve) => setTimeout(resolve, 200));
      }
      const text = await (await fetch(`http://127.0.0.1:${port}/metrics`)).text();
      expect(gauge(text, 'wearshift_alarm_figures_up').get('')).toBe(1);
      expect(gauge(text, 'wearshift_alarm_incidents_open').get('')).toBe(0);
      expect(gauge(text, 'wearshift_alarm_figures_window_days').get('')).toBe(30);
    } finally {
      await serve.stop('SIGTERM');
      await redis.dispose();
    }
  }, 120_000);
});
