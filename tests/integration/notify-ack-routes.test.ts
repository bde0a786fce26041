/**
 * The acknowledgement-link pages, through fastify.inject and once over a real port with fetch, the way a
 * mail client's browser reaches them.
 */
import Fastify, { type FastifyInstance } from 'fastify';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { ackLinkRoutes } from '../../src/http/ackLinkRoutes.ts';
import { signAckLink } from '../../src/notify/ackLink.ts';
import type { AckIncidentSummary } from '../../src/notify/ackPage.ts';

const secret = 'current-ack-secret-0123456789';
const rotatedOut = 'previous-ack-secret-987654321';
const now = new Date('2026-03-02T12:00:00Z');
const expiresAt = new Date('2026-03-04T08:00:00Z');

interface Ack {
  incidentId: string;
  by: string;
  note: string | undefined;
  recipient: string;
}

let app: FastifyInstance;
let acks: Ack[];
let incidents: Map<string, AckIncidentSummary>;
let failNext: boolean;

beforeEach(async () => {
  acks = [];
  failNext = false;
  incidents = new Map([
    ['INC-2026-0007', { id: 'INC-2026-0007', unit: 'PS2-P3', component: 'gearbox', severity: 'caution', state: 'active, unacknowledged', openedAt: '2026-03-01T08:00:00Z', whatChanged: 'Fe wear rate shifted up since LAB-0042.' }],
    ['INC-2026-0009', { id: 'INC-2026-0009', unit: 'GEN-1 <b>', component: 'engine', severity: 'alarm', state: 'closed', openedAt: '2026-02-01T08:00:00Z', closed: true }],
  ]);
  app = Fastify({ logger: false });
  await app.register(ackLinkRoutes, {
    secrets: [secret, rotatedOut],
    now: () => now,
    describe: async (id) => incidents.get(id),
    acknowledge: async (incidentId, by, note, { recipient }) => {
      if (failNext) throw new Error('store unavailable');
      acks.push({ incidentId, by, note, recipient });
      const inc = incidents.get(incidentId);
      if (inc) incidents.set(incidentId, { ...inc, acknowledgedBy: by, state: 'active, acknowledged' });
    },
  });
});

afterEach(async () => {
  await app.close();
});

const token = (incidentId = 'INC-2026-0007', key = secret, expiry = expiresAt) => signAckLink({ incidentId, recipient: 'oncall@plant.example', expiresAt: expiry }, key);
const form = (fields: Record<string, string>) => ({ headers: { 'content-type': 'application/x-www-form-urlencoded' }, payload: new URLSearchParams(fields).toString() });

describe('acknowledgement link pages', () => {
  it('GET shows the incident and a confirmation form, and does not acknowledge', async () => {
    for (let i = 0; i < 3; i++) {
      const res = await app.inject({ method: 'GET', url: `/ack/${token()}` });
      expect(res.statusCode).toBe(200);
      expect(res.headers['content-type']).toBe('text/html; charset=utf-8');
      expect(res.headers['cache-control']).toBe('no-store');
      expect(res.headers['referrer-policy']).toBe('no-referrer');
      expect(res.body).toContain('PS2-P3 / gearbox');
      expect(res.body).toContain('Fe wear rate shifted up since LAB-0042.');
      expect(res.body).toContain('<form method="post">');
      expect(res.body).toContain('value="oncall@plant.example"');
      expect(res.body).toContain('2026-03-04T08:00Z');
      // The severity by shape and word, and a way to the incident's page on the board (relative to the link).
      expect(res.body).toMatch(/<td>[◇▲■] (watch|caution|alarm)/);
      expect(res.body).toMatch(/<a href="\.\.\/incidents\/[^"]+">The incident on the board/);
    }
    const head = await app.inject({ method: 'HEAD', url: `/ack/${token()}` });
    expect(head.statusCode).toBe(200);
    expect(acks).toEqual([]);
  });

  it('POST acknowledges once; a second POST changes nothing', async () => {
    const first = await app.inject({ method: 'POST', url: `/ack/${token()}`, ...form({ name: 'R. Okafor', note: 'Sampling again\r\ntomorrow' }) });
    expect(first.statusCode).toBe(200);
    expect(first.body).toContain('is acknowledged by R. Okafor');
    expect(first.body).toContain('active, acknowledged');
    expect(acks).toEqual([{ incidentId: 'INC-2026-0007', by: 'R. Okafor', note: 'Sampling again tomorrow', recipient: 'oncall@plant.example' }]);

    const second = await app.inject({ method: 'POST', url: `/ack/${token()}`, ...form({ name: 'Somebody Else' }) });
    expect(second.statusCode).toBe(200);
    expect(second.body).toContain('was already acknowledged by R. Okafor');
    expect(acks).toHaveLength(1);
  });

  it('asks again for a name instead of acknowledging anonymously', async () => {
    const res = await app.inject({ method: 'POST', url: `/ack/${token()}`, ...form({ name: '  \u0000 ', note: 'x' }) });
    expect(res.statusCode).toBe(400);
    expect(res.body).toContain('Please give your name');
    expect(res.body).toContain('<form method="post">');
    const long = await app.inject({ method: 'POST', url: `/ack/${token()}`, ...form({ name: 'n'.repeat(81) }) });
    expect(long.statusCode).toBe(400);
    expect(acks).toEqual([]);
  });

  it('refuses expired links with 410 and altered or broken ones with 403, each with a clear sentence', async () => {
    const expired = token('INC-2026-0007', secret, new Date('2026-03-02T11:59:59Z'));
    for (const method of ['GET', 'POST'] as const) {
      const gone = await app.inject({ method, url: `/ack/${expired}`, ...form({ name: 'R. Okafor' }) });
      expect(gone.statusCode).toBe(410);
      expect(gone.body).toContain('This acknowledgement link has expired.');

      const good = token();
      const altered = `${good.slice(0, 10)}${good[10] === 'A' ? 'B' : 'A'}${good.slice(11)}`;
      const forged = await app.inject({ method, url: `/ack/${altered}`, ...form({ name: 'R. Okafor' }) });
      expect(forged.statusCode).toBe(403);
      expect(forged.body).toContain('This acknowledgement link is not valid: it was changed after it was sent.');

      const cut = await app.inject({ method, url: `/ack/${good.slice(0, 30)}`, ...form({ name: 'R. Okafor' }) });
      expect(cut.statusCode).toBe(403);
      expect(cut.body).toContain('incomplete or cut short');

      const unknownKey = await app.inject({ method, url: `/ack/${token('INC-2026-0007', 'not-one-of-ours-0123456789')}`, ...form({ name: 'R. Okafor' }) });
      expect(unknownKey.statusCode).toBe(403);
    }
    expect(acks).toEqual([]);
  });

  it('accepts links signed with the secret being rotated out', async () => {
    const res = await app.inject({ method: 'POST', url: `/ack/${token('INC-2026-0007', rotatedOut)}`, ...form({ name: 'R. Okafor' }) });
    expect(res.statusCode).toBe(200);
    expect(acks).toHaveLength(1);
  });

  it('says so for closed and unknown incidents, with names escaped', async () => {
    const closed = await app.inject({ method: 'POST', url: `/ack/${token('INC-2026-0009')}`, ...form({ name: 'R. Okafor' }) });
    expect(closed.statusCode).toBe(409);
    expect(closed.body).toContain('is closed; there is nothing left to acknowledge');
    expect(closed.body).toContain('GEN-1 &lt;b&gt; / engine');
    const unknown = await app.inject({ method: 'GET', url: `/ack/${token('INC-2026-0404')}` });
    expect(unknown.statusCode).toBe(404);
    expect(unknown.body).toContain('The incident this link refers to is not known here.');
    expect(acks).toEqual([]);
  });

  it('reports a failed acknowledgement without claiming success', async () => {
    failNext = true;
    const res = await app.inject({ method: 'POST', url: `/ack/${token()}`, ...form({ name: 'R. Okafor' }) });
    expect(res.statusCode).toBe(500);
    expect(res.body).toContain('could not be recorded, and nothing was changed');
  });

  it('works over a real port with a token longer than the router’s parameter limit', async () => {
    const long = signAckLink({ incidentId: 'INC-2026-0007', recipient: `${'reliability.engineering.on-call'.repeat(3)}@plant.example`, expiresAt }, secret);
    expect(long.length).toBeGreaterThan(100);
    const address = await app.listen({ port: 0, host: '127.0.0.1' });
    const page = await fetch(`${address}/ack/${long}`);
    expect(page.status).toBe(200);
    expect(await page.text()).toContain('<form method="post">');
    expect(acks).toEqual([]);
    // What the browser sends when the form is submitted.
    const done = await fetch(`${address}/ack/${long}`, { method: 'POST', body: new URLSearchParams({ name: 'R. Okafor', note: 'on my way' }) });
    expect(done.status).toBe(200);
    expect(await done.text()).toContain('is acknowledged by R. Okafor');
    expect(acks).toEqual([{ incidentId: 'INC-2026-0007', by: 'R. Okafor', note: 'on my way', recipient: expect.stringContaining('@plant.example') }]);
  });
});
