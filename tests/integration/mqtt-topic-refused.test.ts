/**
 * `wearshift worker` with an MQTT topic template the broker keeps for itself (starting with "$") does not start: the
 * configuration is refused when it is read, naming the channel and the field, with the exit code of a configuration
 * error, instead of a worker that runs until every message of that channel fails at its publish and is retried.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startCli } from '../helpers/cli.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let redis: RedisServer;
let dir: string;

beforeAll(async () => {
  redis = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-mqtt-topic-'));
});
afterAll(async () => {
  await redis?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

describe('a worker whose MQTT topic starts with "$"', () => {
  it('refuses to start and names the channel and its topic', async () => {
    const file = join(dir, 'config.yaml');
    writeFileSync(
      file,
      `redis: { prefix: "{mqtt-topic}" }
escalation:
  policies:
    - { name: on-call, tiers: [ { afterMinutes: 0, mqtt: [historian] } ] }
channels:
  mqtt:
    - { name: historian, url: "mqtt://127.0.0.1:1883", topic: "$SYS/wearshift/{unit}/{component}" }
`,
    );
    const worker = startCli(['worker', '--config', file], { REDIS_URL: redis.url });
    // Ends by itself when the configuration is refused; a worker that starts says so in its log, and is stopped.
    const code = await new Promise<number | null>((resolve) => {
      worker.child.once('exit', (c) => resolve(c));
      const watch = setInterval(() => {
        if (!worker.output().includes('"msg":"starting"')) return;
        clearInterval(watch);
        void worker.stop('SIGKILL');
      }, 50);
      worker.child.once('exit', () => clearInterval(watch));
    });
    expect(worker.output()).not.toContain('"msg":"starting"');
    expect(code).toBe(2);
    expect(worker.output()).toContain('channels.mqtt.0.topic: MQTT channel "historian": the topic "$SYS/wearshift/{unit}/{component}" starts with "$"');
  }, 600_000);
});
