/**
 * The compose file wires Redis and `wearshift serve` together as the README describes. Compose semantics
 * (service names resolve as host names on the default network, `depends_on` with `condition`) follow the
 * Compose Specification (compose-spec.io, services and volumes top-level elements).
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { parse } from 'yaml';
import { parseConfig } from '../../src/domain/configFile.ts';

interface Service {
  image?: string;
  build?: unknown;
  command?: string[] | string;
  volumes?: string[];
  environment?: Record<string, string>;
  depends_on?: string[] | Record<string, { condition?: string }>;
}

const compose = parse(readFileSync('docker-compose.yml', 'utf8')) as { services: Record<string, Service>; volumes?: Record<string, unknown> };
const services = compose.services;
const words = (c: Service['command']) => (Array.isArray(c) ? c : (c ?? '').split(/\s+/));
/** The value after `--name` in a redis-server command line. */
const argAfter = (cmd: string[], name: string) => cmd[cmd.indexOf(name) + 1];

describe('docker-compose.yml', () => {
  it('runs Redis 7 with append-only persistence and no eviction, its data on a named volume', () => {
    const redis = services['redis']!;
    expect(redis.image).toMatch(/^redis:7/);
    const cmd = words(redis.command);
    expect(cmd[0]).toBe('redis-server');
    expect(argAfter(cmd, '--appendonly')).toBe('yes');
    // A queue must not lose jobs to eviction: BullMQ's "Going to production" guide asks for maxmemory-policy noeviction (from memory).
    expect(argAfter(cmd, '--maxmemory-policy')).toBe('noeviction');
    const data = (redis.volumes ?? []).map((v) => v.split(':')).find(([, target]) => target === '/data');
    expect(data, 'a volume on /data').toBeDefined();
    expect(Object.keys(compose.volumes ?? {})).toContain(data![0]);
  });

  it('builds wearshift from the Dockerfile, runs serve after Redis is healthy, and points REDIS_URL at the redis service', () => {
    const app = services['wearshift']!;
    expect(app.build).toBeDefined();
    expect(words(app.command).slice(-1)[0]).toBe('serve');
    const depends = app.depends_on;
    const names = Array.isArray(depends) ? depends : Object.keys(depends ?? {});
    expect(names).toContain('redis');
    if (!Array.isArray(depends)) expect(depends?.['redis']?.condition).toBe('service_healthy');
    const url = new URL(app.environment!['REDIS_URL']!);
    expect(url.protocol).toBe('redis:');
    expect(Object.keys(services)).toContain(url.hostname);
    expect(words(services[url.hostname]!.command)[0]).toBe('redis-server');
    expect(app.environment!['PORT']).toMatch(/^\d+$/);
    for (const role of ['INGEST', 'RESPONDER', 'VIEWER']) expect(app.environment![`WEARSHIFT_TOKEN_${role}`]).toMatch(new RegExp(`^\\$\\{WEARSHIFT_TOKEN_${role}`));
  });

  it('mounts config/wearshift.yaml where WEARSHIFT_CONFIG points, and that file is a valid configuration', () => {
    const app = services['wearshift']!;
    const mount = (app.volumes ?? []).map((v) => v.split(':')).find(([source]) => source === './config/wearshift.yaml');
    expect(mount, 'config mount').toBeDefined();
    expect(app.environment!['WEARSHIFT_CONFIG']).toBe(mount![1]);
    const config = parseConfig(readFileSync('config/wearshift.yaml', 'utf8'), 'config/wearshift.yaml');
    expect(config.groups.length).toBeGreaterThan(0);
    // Every secret the configuration names by environment variable is handed to the container.
    const named = [config.channels.email?.smtp.passwordEnv, config.channels.ackLinks?.secretEnv, ...config.channels.webhooks.flatMap((w) => w.secrets)].filter(
      (n): n is string => n !== undefined && !n.startsWith('whsec_'),
    );
    for (const n of named) expect(Object.keys(app.environment!)).toContain(n);
  });

  it('the Dockerfile runs `node bin/wearshift.js serve` on Node 20', () => {
    const dockerfile = readFileSync('Dockerfile', 'utf8');
    expect(dockerfile).toMatch(/^FROM node:20/m);
    expect(dockerfile).toMatch(/^CMD \["node", "bin\/wearshift\.js", "serve"\]$/m);
  });
});
