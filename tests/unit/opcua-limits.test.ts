/** The OPC UA server's bounds as configured and as kept: session quota per user and for responders, shelving limits. */
import { describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import { OpcuaConfigSchema, OpcuaLimitsSchema } from '../../src/domain/opcuaConfig.ts';
import { SessionQuota } from '../../src/opcua/sessionQuota.ts';

const operator = { userName: 'operator', role: 'responder' } as const;
const watcher = { userName: 'watcher', role: 'viewer' } as const;
const historian = { userName: 'historian', role: 'viewer' } as const;
const anonymous = { userName: undefined, role: 'viewer' } as const;

describe('SessionQuota', () => {
  const limits = { maxSessions: 6, responderSessions: 2, maxSessionsPerUser: 3 };

  it('one user holds at most maxSessionsPerUser; anonymous sessions together count as one user', () => {
    const q = new SessionQuota<number>(limits);
    for (const s of [1, 2, 3]) expect(q.admit(s, watcher)).toBeUndefined();
    expect(q.admit(4, watcher)).toBe('user-full');
    expect(q.admit(5, anonymous)).toBeUndefined();
    q.release(1);
    expect(q.admit(4, watcher)).toBeUndefined();
    expect(q.size).toBe(4);
  });

  it('viewers and anonymous sessions together leave responderSessions free, which responders then take', () => {
    const q = new SessionQuota<number>(limits);
    for (const s of [1, 2, 3]) expect(q.admit(s, watcher)).toBeUndefined();
    expect(q.admit(4, anonymous)).toBeUndefined();
    expect(q.admit(5, historian)).toBe('viewers-full');
    expect(q.admit(6, anonymous)).toBe('viewers-full');
    expect(q.admit(7, operator)).toBeUndefined();
    expect(q.admit(8, operator)).toBeUndefined();
    expect(q.admit(9, operator)).toBe('server-full');
  });

  it('a session activated again by its user keeps its place; activated by another user it is counted anew', () => {
    const q = new SessionQuota<number>({ ...limits, maxSessionsPerUser: 1 });
    expect(q.admit(1, watcher)).toBeUndefined();
    expect(q.admit(1, watcher)).toBeUndefined();
    expect(q.admit(2, watcher)).toBe('user-full');
    expect(q.admit(1, operator)).toBeUndefined();
    expect(q.admit(2, watcher)).toBeUndefined();
    expect(q.size).toBe(2);
  });
});

describe('opcua limits in the configuration', () => {
  it('have defaults, and keep fewer responder sessions than sessions', () => {
    expect(OpcuaConfigSchema.parse({}).limits).toMatchObject({ maxSessions: 50, responderSessions: 10, maxSessionsPerUser: 10, sessionTimeoutSeconds: 300 });
    expect(() => OpcuaLimitsSchema.parse({ maxSessions: 5, responderSessions: 5 })).toThrow(/responderSessions[\s\S]*fewer than maxSessions/);
  });

  it('a OneShotShelve longer than incidents.maxShelveHours is refused when the configuration is read, naming both keys', () => {
    const parsed = ConfigSchema.safeParse({ incidents: { maxShelveHours: 8 }, opcua: { port: 4840 } });
    expect(parsed.success).toBe(false);
    const issue = parsed.error!.issues.find((i) => i.path.join('.') === 'opcua.oneShotShelveHours');
    expect(issue?.message).toContain('incidents.maxShelveHours (8 h)');
    expect(ConfigSchema.safeParse({ incidents: { maxShelveHours: 8 }, opcua: { port: 4840, oneShotShelveHours: 8 } }).success).toBe(true);
    // opcua.maxShelveHours above the incident limit is allowed: the server advertises and enforces the shorter one.
    expect(ConfigSchema.safeParse({ incidents: { maxShelveHours: 48 }, opcua: { port: 4840, maxShelveHours: 168 } }).success).toBe(true);
  });

  it('advertisedHost takes a host name or an address, nothing that would break the endpoint URL', () => {
    expect(OpcuaConfigSchema.parse({ advertisedHost: 'scada-gw.plant.example' }).advertisedHost).toBe('scada-gw.plant.example');
    expect(OpcuaConfigSchema.parse({ advertisedHost: '10.0.4.17' }).advertisedHost).toBe('10.0.4.17');
    expect(() => OpcuaConfigSchema.parse({ advertisedHost: 'gw/evil:1' })).toThrow();
  });
});
