/**
 * A webhook receiver that answers 410 Gone is not called again (the Standard Webhooks convention for "stop
 * sending"): the mark lives in Redis, so every worker process and every later message respects it. It holds for the
 * endpoint's name at the URL that answered: another URL in the configuration is called. Each message it stops fails
 * with a warning, so that `wearshift failed list` shows it, and `wearshift failed enable-webhook` followed by
 * `wearshift failed retry` sends it after all.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { Queue } from 'bullmq';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { ChannelsSchema } from '../../src/domain/escalationConfig.ts';
import type { IncidentEffect, NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { effectJobId, relayEffects } from '../../src/queue/outboxRelay.ts';
import { startWorkers } from '../../src/queue/workers.ts';
import { redisDisabledEndpoints } from '../../src/redis/disabledEndpoints.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { createLogger, silentLogger } from '../../src/telemetry/logger.ts';
import { runCli } from '../helpers/cli.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { incidentMessage } from '../unit/notify-fixtures.ts';

const SECRET = `whsec_${Buffer.alloc(32, 7).toString('base64')}`;
let redis: RedisServer;
let receiver: Server;
let dir: string;
/** Paths that answer 410 Gone; every other path answers 204. */
const gone = new Set<string>();
const requests: Array<{ path: string; type: string }> = [];

beforeAll(async () => {
  redis = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-disable-'));
  receiver = createServer((req, res) => {
    const chunks: Buffer[] = [];
    req.on('data', (c: Buffer) => chunks.push(c));
    req.on('end', () => {
      const path = req.url ?? '';
      requests.push({ path, type: (JSON.parse(Buffer.concat(chunks).toString('utf8')) as { type: string }).type });
      res.writeHead(gone.has(path) ? 410 : 204).end();
    });
  });
  await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', r));
});

afterAll(async () => {
  receiver.closeAllConnections();
  await new Promise((r) => receiver.close(r));
  await redis.dispose();
  rmSync(dir, { recursive: true, force: true });
});

const base = () => `http://127.0.0.1:${(receiver.address() as AddressInfo).port}`;

function effect(seq: number): NotifyEffect {
  const message = incidentMessage();
  return {
    kind: 'notify',
    key: `${message.incident.id}:${seq}:webhook:0:plant-bus`,
    incidentId: message.incident.id,
    eventSeq: seq,
    type: 'wearshift.incident.updated',
    channel: 'webhook',
    target: 'plant-bus',
    tier: 0,
    at: '2026-03-01T08:00:00.000Z',
    incident: {} as NotifyEffect['incident'],
  } as NotifyEffect;
}

/** A logger whose lines the test reads. */
function capturingLogger() {
  const lines: Array<Record<string, unknown>> = [];
  const sink = new Writable({
    write(chunk: Buffer, _encoding, done) {
      for (const line of chunk.toString('utf8').split('\n')) if (line.trim() !== '') lines.push(JSON.parse(line) as Record<string, unknown>);
      done();
    },
  });
  return { logger: createLogger({ destination: sink, level: 'info' }), lines };
}

describe('410 Gone disables a webhook endpoint', () => {
  it('the first delivery fails for good and marks the endpoint; later ones, from any process, fail with a warning and no request', async () => {
    gone.add('/hook');
    requests.length = 0;
    const channels = ChannelsSchema.parse({ webhooks: [{ name: 'plant-bus', url: `${base()}/hook`, secrets: [SECRET] }] });
    const first = notificationChannels(channels, { logger: silentLogger(), disabledEndpoints: redisDisabledEndpoints(redis.client(), '{t}') });
    await expect(first.deliver({ effect: effect(1), message: incidentMessage(), attempt: 1 })).rejects.toThrow(/410 Gone.*disabled until its URL changes in the configuration or `wearshift failed enable-webhook plant-bus`/);
    expect(requests).toHaveLength(1);

    // Another worker process: its own channels, the same Redis.
    const { logger, lines } = capturingLogger();
    const second = notificationChannels(channels, { logger, disabledEndpoints: redisDisabledEndpoints(redis.client(), '{t}') });
    for (const seq of [2, 3]) {
      await expect(second.deliver({ effect: effect(seq), message: incidentMessage(), attempt: 1 })).rejects.toThrow(/not sent, the endpoint is disabled \(410 Gone at .*\); `wearshift failed enable-webhook plant-bus`/);
    }
    expect(requests).toHaveLength(1);
    const warnings = lines.filter((l) => l.msg === 'webhook endpoint disabled by 410 Gone: message not sent');
    expect(warnings).toHaveLength(2);
    expect(warnings[0]).toMatchObject({ level: 40, channel: 'webhook:plant-bus', incidentId: 'INC-2026-0007' });

    // The same name at another URL (the integrator moved the receiver): called again.
    const moved = ChannelsSchema.parse({ webhooks: [{ name: 'plant-bus', url: `${base()}/hook-v2`, secrets: [SECRET] }] });
    const third = notificationChannels(moved, { logger: silentLogger(), disabledEndpoints: redisDisabledEndpoints(redis.client(), '{t}') });
    await expect(third.deliver({ effect: effect(4), message: incidentMessage(), attempt: 1 })).resolves.toBe('webhook plant-bus: 204');
    expect(requests.map((r) => r.path)).toEqual(['/hook', '/hook-v2']);
    await Promise.all([first.close(), second.close(), third.close()]);
  });

  it('a message it stopped is listed by `failed list`, and sent by `failed retry` once `failed enable-webhook` clears the mark', async () => {
    const prefix = '{disable}';
    const url = `${base()}/control-room`;
    gone.add('/control-room');
    requests.length = 0;
    const yaml = `
redis: { prefix: "${prefix}" }
escalation:
  policies:
    - name: on-call
      tiers: [ { afterMinutes: 0, webhooks: [control-room] } ]
channels:
  webhooks:
    - { name: control-room, url: "${url}", secrets: ["${SECRET}"] }
`;
    const configFile = join(dir, 'config.yaml');
    writeFileSync(configFile, yaml);
    const config = parseConfig(yaml);
    const connection = redis.client();
    const incidents = new RedisIncidents(connection, { rules: incidentRules(config), prefix });
    const notify = new Queue('notify', { connection, prefix });
    const escalate = new Queue('escalate', { connection, prefix });
    const { logger } = capturingLogger();
    const workers = startWorkers(
      { connection, config, logger, channels: notificationChannels(config.channels, { logger, disabledEndpoints: redisDisabledEndpoints(connection, prefix) }) },
      { prefix, outboxIntervalMs: 3_600_000 },
    );
    const env = { REDIS_URL: redis.url };
    try {
      /** Opens an incident on a unit and hands its tier-0 message to the queue; resolves with the message's job id. */
      const open = async (unit: string): Promise<string> => {
        const sampledAt = new Date(Date.now() - 86_400_000).toISOString();
        const finding = { unit, component: 'gearbox', group: 'gearboxes', measurand: 'Fe' as const, rule: 'limit' as const, disposition: 'incident' as const, severity: 'alarm' as const, value: 95, threshold: 80, basis: 'reading' as const, sampleId: `${unit}-1`, sampledAt, explanation: 'Fe 95 ppm is above the alarm level of 80 ppm.' };
        await incidents.applySteps({ unit, component: 'gearbox' }, [{ sampleId: `${unit}-1`, sampledAt, findings: [finding] }], { group: 'gearboxes', now: new Date(), quietBefore: new Date(0) });
        const effects: IncidentEffect[] = [];
        await incidents.drainOutbox(async (batch) => {
          effects.push(...batch);
        });
        await relayEffects(effects, { notify, escalate }, Date.now());
        const message = effects.find((e): e is NotifyEffect => e.kind === 'notify' && e.incidentId.startsWith(`${unit}/`))!;
        return effectJobId(message.key);
      };
      const settled = async (jobId: string): Promise<string> => {
        const deadline = Date.now() + 120_000;
        for (;;) {
          const state = (await (await notify.getJob(jobId))?.getState()) ?? 'missing';
          if (state === 'completed' || state === 'failed') return state;
          if (Date.now() > deadline) throw new Error(`timed out waiting for ${jobId} (${state})`);
          await new Promise((r) => setTimeout(r, 100));
        }
      };

      // The first message meets the 410 and disables the endpoint; the second is stopped without a request.
      const answered410 = await open('PS5-Gone');
      expect(await settled(answered410)).toBe('failed');
      const stopped = await open('PS6-Stopped');
      expect(await settled(stopped)).toBe('failed');
      expect(requests.map((r) => r.path)).toEqual(['/control-room']);

      const listed = await runCli(['failed', 'list', '--config', configFile, '--json'], env);
      expect(listed.code).toBe(0);
      const failed = listed.stdout.trim().split('\n').map((l) => JSON.parse(l) as { ref: string; subject: string; reason: string });
      const stoppedJob = failed.find((j) => j.ref === `notify/${stopped}`);
      expect(stoppedJob?.subject).toBe('PS6-Stopped/gearbox@PS6-Stopped-1');
      expect(stoppedJob?.reason).toMatch(/not sent, the endpoint is disabled \(410 Gone at /);
      const table = await runCli(['failed', 'list', '--config', configFile], env);
      expect(table.stdout).toContain('webhook endpoints disabled by 410 Gone, every message to them fails: control-room (see `wearshift failed webhooks`)');

      const disabled = await runCli(['failed', 'webhooks', '--config', configFile, '--json'], env);
      expect(disabled.code).toBe(0);
      const endpoints = disabled.stdout.trim().split('\n').map((l) => JSON.parse(l) as Record<string, string>);
      expect(endpoints).toEqual([{ name: 'control-room', url, reason: expect.stringMatching(/^410 Gone at /) as unknown as string, state: 'disabled' }]);

      // The receiver is back; the operator enables the endpoint and retries what failed meanwhile.
      gone.delete('/control-room');
      const enabled = await runCli(['failed', 'enable-webhook', 'control-room', '--config', configFile], env);
      expect(enabled.code).toBe(0);
      expect(enabled.stdout).toBe('control-room enabled: messages go to it again\n');
      const again = await runCli(['failed', 'enable-webhook', 'control-room', '--config', configFile], env);
      expect(again.code).toBe(2);
      expect(again.stderr).toMatch(/no disabled webhook endpoint of that name/);
      expect((await runCli(['failed', 'webhooks', '--config', configFile], env)).stdout).toBe('no disabled webhook endpoints\n');

      const retried = await runCli(['failed', 'retry', `notify/${stopped}`, '--config', configFile], env);
      expect(retried.code).toBe(0);
      expect(await settled(stopped)).toBe('completed');
      expect(requests.map((r) => `${r.path} ${r.type}`)).toEqual(['/control-room wearshift.incident.opened', '/control-room wearshift.incident.opened']);
    } finally {
      await workers.close();
      await notify.close();
      await escalate.close();
    }
  });
});
