/**
 * The API serves the pages behind the e-mailed acknowledgement links whenever `channels.ackLinks` is configured, and
 * checks every link with its secret: an API process (`wearshift api`, and `serve`) whose secret is unset, empty or
 * unusable does not start — it names `channels.ackLinks`, the variable and the reason, as a worker does for its
 * channels — instead of answering each link followed with an error. Without `channels.ackLinks` it says at start
 * that it serves no acknowledgement pages, and the path answers a 404 that says so. Against a private redis-server.
 */
import { PassThrough } from 'node:stream';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Fastify from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ackLinkRoutes } from '../../src/http/ackLinkRoutes.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { InputError } from '../../src/domain/errors.ts';
import { signAckLink } from '../../src/notify/ackLink.ts';
import { startServices } from '../../src/runtime/services.ts';
import { closeAll } from '../../src/runtime/shutdown.ts';
import { createLogger, silentLogger } from '../../src/telemetry/logger.ts';
import { runCli } from '../helpers/cli.ts';
import { freePort, startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const SECRET = 'api-ack-secret-0123456789abcdef';
const WITH_LINKS = `
redis: { prefix: "{api-ack}" }
channels:
  webhooks: [ { name: control-room, url: "http://127.0.0.1:9/hook", secrets: [API_ACK_WEBHOOK_SECRET] } ]
  ackLinks: { baseUrl: "https://wearshift.plant.example", secretEnv: API_ACK_SECRET }
`;

let redis: RedisServer;
let dir: string;

beforeAll(async () => {
  redis = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-api-ack-'));
}, 60_000);
afterAll(async () => {
  await redis?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

/** The API alone, in this process, on a free port; its log lines are kept. */
async function startApi(configText: string, env: NodeJS.ProcessEnv) {
  const sink = new PassThrough();
  let log = '';
  sink.on('data', (d: Buffer) => (log += d.toString()));
  const logger = createLogger({ destination: sink, level: 'info' });
  const running = await startServices({ workers: false, http: true, config: parseConfig(configText), logger, port: await freePort(), host: '127.0.0.1', env: { REDIS_URL: redis.url, ...env } });
  const url = running.url!;
  // Ready once its Redis connection is: the pages read the incident a link names.
  const deadline = Date.now() + 60_000;
  while ((await fetch(`${url}/readyz`).then((r) => r.status, () => 0)) !== 200) {
    if (Date.now() > deadline) throw new Error('the API did not become ready');
    await new Promise((r) => setTimeout(r, 100));
  }
  return { url, log: () => log, close: () => closeAll(running.closers, { timeoutMs: 10_000, logger: silentLogger() }) };
}

async function refusal(configText: string, env: NodeJS.ProcessEnv): Promise<Error | undefined> {
  return startApi(configText, env).then(
    async (api) => {
      await api.close();
      return undefined;
    },
    (e: Error) => e,
  );
}

describe('an API with channels.ackLinks configured', () => {
  it('refuses to start while the secret is unset, empty or too short, naming the variable and the reason', async () => {
    const header = 'acknowledgement links: the secret is missing or unusable (the API serves the acknowledgement pages while channels.ackLinks is configured)';
    const unset = await refusal(WITH_LINKS, {});
    expect(unset).toBeInstanceOf(InputError);
    expect(unset!.message.split('\n')).toEqual([header, '  channels.ackLinks (the link-signing secret): environment variable API_ACK_SECRET is not set']);
    expect((await refusal(WITH_LINKS, { API_ACK_SECRET: '' }))!.message).toContain('environment variable API_ACK_SECRET is empty');
    // Every secret of a rotation is checked: an old one too short would fail each link signed with it.
    const short = await refusal(WITH_LINKS, { API_ACK_SECRET: `${SECRET},tiny` });
    expect(short!.message.split('\n')).toEqual([
      header,
      '  channels.ackLinks (the link-signing secret): environment variable API_ACK_SECRET: a secret shorter than 16 characters (shorter ones can be guessed from one captured link)',
    ]);
    expect(short!.message).not.toContain('tiny');
  });

  it('serves the pages with a usable secret: a link it signed opens, a forged one is refused', async () => {
    const api = await startApi(WITH_LINKS, { API_ACK_SECRET: SECRET });
    try {
      const link = signAckLink({ incidentId: 'PS1/gearbox@LAB-1', recipient: 'oncall@plant.example', expiresAt: new Date(Date.now() + 3_600_000) }, SECRET);
      // No such incident here: the link itself was accepted, so the page says the incident is unknown.
      expect((await fetch(`${api.url}/ack/${link}`)).status).toBe(404);
      const forged = signAckLink({ incidentId: 'PS1/gearbox@LAB-1', recipient: 'oncall@plant.example', expiresAt: new Date(Date.now() + 3_600_000) }, 'another-secret-0123456789');
      expect((await fetch(`${api.url}/ack/${forged}`)).status).toBe(403);
      expect(api.log()).not.toContain('acknowledgement pages not served');
    } finally {
      await api.close();
    }
  });

  it('as the process `wearshift api`: exit 2 with the message, no stack trace', { timeout: 600_000 }, async () => {
    const file = join(dir, 'links.yaml');
    writeFileSync(file, WITH_LINKS);
    // The webhook's secret is the workers' business: an API without workers does not ask for it.
    const r = await runCli(['api', '--config', file, '--port', String(await freePort())], { REDIS_URL: redis.url, LOG_LEVEL: 'warn', API_ACK_SECRET: 'short' });
    expect(r.stderr).toContain('wearshift: acknowledgement links: the secret is missing or unusable');
    expect(r.stderr).toContain('channels.ackLinks (the link-signing secret): environment variable API_ACK_SECRET: a secret shorter than 16 characters');
    expect(r.stderr).not.toContain('API_ACK_WEBHOOK_SECRET');
    expect(r.stderr).not.toMatch(/\n\s+at /);
    expect(r.code).toBe(2);
  });
});

describe('the acknowledgement pages built with a secret too short', () => {
  it('are refused when the server is built, not by every link followed', async () => {
    const app = Fastify({ logger: false });
    await expect(app.register(ackLinkRoutes, { secrets: [SECRET, 'tiny'], acknowledge: async () => {}, describe: async () => undefined }).ready()).rejects.toThrow(
      'ackLinkRoutes: every secret must be at least 16 characters long',
    );
    await app.close();
  });
});

describe('an API without channels.ackLinks', () => {
  it('says at start that it serves no acknowledgement pages, and the path answers 404 saying so without echoing the token', async () => {
    const api = await startApi('redis: { prefix: "{api-ack-none}" }', {});
    try {
      expect(api.log()).toContain('acknowledgement pages not served: channels.ackLinks is not configured');
      const link = signAckLink({ incidentId: 'PS1/gearbox@LAB-1', recipient: 'oncall@plant.example', expiresAt: new Date(Date.now() + 3_600_000) }, SECRET);
      for (const method of ['GET', 'POST']) {
        const res = await fetch(`${api.url}/ack/${link}`, { method });
        expect(res.status, method).toBe(404);
        const body = (await res.json()) as { error: string; message: string };
        expect(body.error).toBe('not-found');
        expect(body.message).toBe(`no route for ${method} /ack/…: this server serves no acknowledgement pages (wearshift api and serve do, while channels.ackLinks is configured)`);
        expect(JSON.stringify(body)).not.toContain(link.slice(0, 20));
      }
    } finally {
      await api.close();
    }
  });
});
