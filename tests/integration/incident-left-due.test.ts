/**
 * On a private redis-server: an evaluation that judges a component up to a month's end while a later stored sample
 * opened an incident leaves that incident on record as it stands (tests/unit/incident-left-due.test.ts shows the
 * verdict). Until the run that folds the sample again brings it back into the component's state, an acknowledgement
 * is refused with a conflict that says to try again shortly (over HTTP a 409 with Retry-After), and an escalation check asks to come again (`later`)
 * instead of finding nothing and dropping the escalation. Afterwards both act as on any incident, and no message key
 * was handed out twice.
 */
import Fastify from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { ResultEvent } from '../../src/domain/event.ts';
import { incidentRoutes } from '../../src/http/incidentRoutes.ts';
import { IncidentConflictError } from '../../src/incidents/errors.ts';
import type { IncidentEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { ComponentRun } from '../../src/pipeline/componentRun.ts';
import type { EvaluationDeps } from '../../src/pipeline/evaluateStored.ts';
import { settleComponent } from '../../src/pipeline/settleComponent.ts';
import { storeResult } from '../../src/pipeline/storeResult.ts';
import { JUDGED_AGAIN, JUDGED_AGAIN_RETRY_S, RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { CONFIG, NOW, REF } from '../helpers/engineIronLimit.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let server: RedisServer;

beforeAll(async () => {
  server = await startRedisServer();
});

afterAll(async () => {
  await server?.stop();
});

const at = (sampleId: string, sampledAt: string, fe: number): ResultEvent => ({ ...REF, sampleId, revision: 0, sampledAt, readings: { Fe: fe } });

describe('an incident left due by a run judged up to a month end, on Redis', () => {
  it('refuses an acknowledgement and puts an escalation check back until its sample is judged again, then takes both', async () => {
    const prefix = '{leftdue}';
    const rules = incidentRules(CONFIG);
    const store = new RedisStore(server.client(), { prefix, config: CONFIG });
    const incidents = new RedisIncidents(server.client(), { prefix, rules });
    const deps: EvaluationDeps = { store, ledger: store, config: CONFIG, rules, now: () => NOW, checkpointEvery: 5 };
    const outbox: IncidentEffect[] = [];
    const drain = () => incidents.drainOutbox(async (effects) => void outbox.push(...effects));

    for (const r of [at('D-16-A', '2026-04-20T08:00:00Z', 12), at('D-16-C', '2026-05-02T08:00:00Z', 60)]) {
      const stored = await storeResult(store, CONFIG, r, NOW);
      if (stored.outcome.evaluationDue) await settleComponent(deps, stored.sample);
    }
    await drain();
    const id = 'D-16/engine@D-16-C';
    expect(outbox.filter((e) => e.kind === 'notify').map((e) => e.kind === 'notify' && [e.incidentId, e.type])).toEqual([[id, 'wearshift.incident.opened']]);

    await storeResult(store, CONFIG, at('D-16-B', '2026-04-25T08:00:00Z', 14), NOW);
    const run = await ComponentRun.open(deps, REF);
    if (!(run instanceof ComponentRun)) throw new Error(`the run did not open: ${run.kind}`);
    await run.foldStored(Date.parse('2026-05-01T00:00:00Z'));
    expect((await run.commit()).kind).toBe('evaluated');
    await drain();
    expect(outbox.filter((e) => e.kind === 'notify')).toHaveLength(1);
    expect((await incidents.get(id))?.closed).toBeNull();
    expect(Object.values((await incidents.component(REF)).incidents).map((i) => i.id)).not.toContain(id);

    const now = new Date(NOW + 60_000);
    const refused = await incidents.applyAction({ kind: 'acknowledge', incidentId: id, by: 'on-call', now }).catch((e: unknown) => e);
    expect(refused).toBeInstanceOf(IncidentConflictError);
    expect((refused as Error).message).toContain(JUDGED_AGAIN);
    // Over HTTP: 409 with the reason and when to try again (RFC 9110 §10.2.3 Retry-After, in seconds).
    const app = Fastify();
    await app.register(incidentRoutes, { tokens: accessTokensFromEnv({ WEARSHIFT_TOKEN_RESPONDER: 'resp-leftdue-4c1f9a' }), store: incidents, now: () => now });
    try {
      const answer = await app.inject({ method: 'POST', url: `/v1/incidents/${encodeURIComponent(id)}/ack`, headers: { authorization: 'Bearer resp-leftdue-4c1f9a' }, payload: { by: 'on-call' } });
      expect(answer.statusCode).toBe(409);
      expect(answer.headers['retry-after']).toBe(String(JUDGED_AGAIN_RETRY_S));
      expect(answer.json()).toEqual({ error: 'conflict', message: `incident "${id}": ${JUDGED_AGAIN}` });
    } finally {
      await app.close();
    }
    expect(await incidents.applyEscalationCheck({ incidentId: id, now })).toEqual({ effects: [], later: true });

    await settleComponent(deps, REF);
    await drain();
    expect(Object.values((await incidents.component(REF)).incidents).map((i) => i.id)).toContain(id);
    expect((await incidents.applyEscalationCheck({ incidentId: id, now })).later).toBeUndefined();
    await incidents.applyAction({ kind: 'acknowledge', incidentId: id, by: 'on-call', now });
    await drain();
    const acknowledged = await incidents.get(id);
    expect(acknowledged?.acknowledged?.by).toBe('on-call');
    expect(acknowledged?.closed).toBeNull();

    const keys = outbox.filter((e) => e.kind === 'notify').map((e) => e.key);
    expect(new Set(keys).size).toBe(keys.length);
    expect(outbox.filter((e) => e.kind === 'notify' && e.type === 'wearshift.incident.opened')).toHaveLength(1);
  });
});
