/**
 * `wearshift worker` with a channel secret missing or unusable does not start: it says which channel, which
 * environment variable and why, and exits with the code of a configuration error, instead of running (and answering
 * /readyz) until the first alarm finds out that its message cannot be sent.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let redis: RedisServer;
let dir: string;

beforeAll(async () => {
  redis = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-secrets-'));
});
afterAll(async () => {
  await redis?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

describe('a worker whose channel secrets will not do', () => {
  it('refuses to start and names the channel, the variable and the reason', async () => {
    const file = join(dir, 'config.yaml');
    writeFileSync(
      file,
      `redis: { prefix: "{secrets}" }
escalation:
  policies:
    - { name: on-call, tiers: [ { afterMinutes: 0, email: [oncall@plant.example], webhooks: [control-room] } ] }
channels:
  email: { from: "wearshift <alerts@plant.example>", smtp: { host: 127.0.0.1, port: 2525 } }
  webhooks:
    - { name: control-room, url: "http://127.0.0.1:9/hook", secrets: [SECRETS_TEST_WEBHOOK_SECRET] }
  ackLinks: { baseUrl: "https://wearshift.plant.example", secretEnv: SECRETS_TEST_ACK_SECRET }
`,
    );
    const result = await runCli(['worker', '--config', file], { REDIS_URL: redis.url, SECRETS_TEST_ACK_SECRET: 'short', SECRETS_TEST_WEBHOOK_SECRET: '' });
    expect(result.code).toBe(2);
    expect(result.stderr).toContain('notification channels: secrets missing or unusable');
    expect(result.stderr).toContain('channels.ackLinks (the link-signing secret): environment variable SECRETS_TEST_ACK_SECRET: a secret shorter than 16 characters');
    expect(result.stderr).toContain('channels.webhooks "control-room": environment variable SECRETS_TEST_WEBHOOK_SECRET is empty');
    // The secret's value is not repeated in the message.
    expect(result.stderr).not.toMatch(/\bshort\b(?! than)/);
  });
});
