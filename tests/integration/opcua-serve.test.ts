/**
 * `wearshift serve` starts the OPC UA alarm server when `opcua.port` is set in the configuration or `--opcua-port N`
 * is given, as real child processes with a real Redis; a real OPC UA client (node-opcua-client) connects over
 * opc.tcp on 127.0.0.1 and finds the unit of a result posted to the HTTP API in the address space.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { AttributeIds, BrowseDirection, MessageSecurityMode, OPCUAClient, SecurityPolicy, UserTokenType } from 'node-opcua';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startWearshift, stopAll, waitFor, type WearshiftProcess } from '../helpers/processes.ts';
import { freePort, startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let redis: RedisServer;
let dir: string;

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'wearshift-opcua-serve-'));
  redis = await startRedisServer();
}, 120_000);

afterAll(async () => {
  await stopAll();
  await redis?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

/** An `opcua` section for a test bench: security None, anonymous sessions may browse. */
function configFile(name: string, port?: number): string {
  const file = join(dir, `${name}.yaml`);
  const lines = ['redis:', `  prefix: "{${name}}"`, 'opcua:', ...(port !== undefined ? [`  port: ${port}`] : []), '  host: 127.0.0.1', '  securityModes: [None]', `  pkiDir: ${join(dir, `${name}-pki`)}`, '  anonymous: viewer'];
  writeFileSync(file, `${lines.join('\n')}\n`);
  return file;
}

async function browseNames(endpoint: string, nodeId: string): Promise<string[]> {
  const client = OPCUAClient.create({ endpointMustExist: false, securityMode: MessageSecurityMode.None, securityPolicy: SecurityPolicy.None, connectionStrategy: { maxRetry: 0, initialDelay: 100 } });
  await client.connect(endpoint);
  try {
    const session = await client.createSession({ type: UserTokenType.Anonymous });
    const name = await session.read({ nodeId: 'ns=1;s=Wearshift', attributeId: AttributeIds.BrowseName });
    expect(name.value.value.name).toBe('Wearshift');
    const result = await session.browse({ nodeId, browseDirection: BrowseDirection.Forward, includeSubtypes: true, resultMask: 63 });
    await session.close();
    return (result.references ?? []).map((r) => String(r.browseName.name));
  } finally {
    await client.disconnect();
  }
}

async function serve(name: string, opcuaPort: number, viaFlag: boolean): Promise<WearshiftProcess> {
  return startWearshift('serve', {
    env: { REDIS_URL: redis.url, WEARSHIFT_CONFIG: configFile(name, viaFlag ? undefined : opcuaPort), WEARSHIFT_TOKEN_INGEST: `ingest-${name}` },
    args: viaFlag ? ['--opcua-port', String(opcuaPort)] : [],
    readyTimeoutMs: 180_000,
  });
}

describe('wearshift serve with OPC UA', () => {
  it('opcua.port in the configuration starts the server; a result posted to the API puts its unit and component in the address space', async () => {
    const port = await freePort();
    const proc = await serve('fromconfig', port, false);
    const endpoint = `opc.tcp://127.0.0.1:${port}/wearshift`;
    expect(proc.output()).toContain('OPC UA alarm server listening');
    const posted = await fetch(`${proc.url}/v1/results`, {
      method: 'POST',
      headers: { authorization: 'Bearer ingest-fromconfig', 'content-type': 'application/json' },
      body: JSON.stringify({ sampleId: 'OS-1', unit: 'PS8-P1', component: 'gearbox', sampledAt: '2026-03-01T08:00:00Z', oilHours: 250, readings: { Fe: 14 } }),
    });
    expect(posted.status).toBe(202);
    await waitFor(() => `unit PS8-P1 on ${endpoint}\n${proc.output()}`, async () => (await browseNames(endpoint, 'ns=1;s=Wearshift')).includes('PS8-P1'), 180_000, 500);
    expect(await browseNames(endpoint, 'ns=1;s=unit:PS8-P1')).toContain('gearbox');
    expect(await proc.stop()).toBe(0);
  }, 400_000);

  it('--opcua-port starts the server when the configuration gives no port', async () => {
    const port = await freePort();
    const proc = await serve('fromflag', port, true);
    expect(await browseNames(`opc.tcp://127.0.0.1:${port}/wearshift`, 'ns=1;s=Wearshift')).toEqual(expect.any(Array));
    expect(await proc.stop()).toBe(0);
  }, 400_000);
});
