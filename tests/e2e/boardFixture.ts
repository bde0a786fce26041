/**
 * The board's HTTP application for end-to-end tests: the real board, series, event and incident routes over a
 * real incident store in a private redis-server, fed with the invented demo fleet evaluated by the real core.
 */
import Fastify, { type FastifyInstance } from 'fastify';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import { demoFleet } from '../../src/demo/fleet.ts';
import { loadConfig } from '../../src/domain/configFile.ts';
import { componentKey, parseResultEvent, type Sample } from '../../src/domain/event.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { boardRoutes } from '../../src/http/boardRoutes.ts';
import { announcingActions, createEventHub, type EventHub } from '../../src/http/eventHub.ts';
import { incidentEvent } from '../../src/pipeline/liveEvent.ts';
import { inputOf } from '../../src/render/componentInput.ts';
import { eventRoutes } from '../../src/http/eventRoutes.ts';
import { incidentRoutes } from '../../src/http/incidentRoutes.ts';
import { seriesRoutes } from '../../src/http/seriesRoutes.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { RedisIncidents as RedisIncidentStore } from '../../src/redis/redisIncidents.ts';
import { incidentChanges } from '../../src/pipeline/incidentChanges.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

export const TOKENS = { viewer: 'board-viewer-token', responder: 'board-responder-token' };

export interface BoardFixture {
  readonly url: string;
  readonly app: FastifyInstance;
  readonly hub: EventHub;
  readonly store: RedisIncidentStore;
  /** Feeds a component's evaluated history to the incident store and publishes what changed, as the worker does. */
  feed(unit: string, component: string): Promise<number>;
  close(): Promise<void>;
}

const config = loadConfig(new URL('../../demo/config.yaml', import.meta.url).pathname);

export async function startBoardFixture(components: readonly [string, string][]): Promise<BoardFixture> {
  const redis: RedisServer = await startRedisServer();
  const samples = new Map<string, Sample[]>();
  const wanted = new Set(components.map(([unit, component]) => componentKey({ unit, component })));
  for (const { event } of demoFleet()) {
    const parsed = parseResultEvent(event);
    if (!parsed.ok) throw new Error(`demo event invalid: ${JSON.stringify(parsed.issues)}`);
    const key = componentKey(parsed.sample);
    if (!wanted.has(key)) continue;
    samples.set(key, [...(samples.get(key) ?? []), parsed.sample]);
  }
  const store = new RedisIncidentStore(redis.client(), { rules: incidentRules(config), prefix: '{board-e2e}' });
  const hub = createEventHub();
  process.env.WEARSHIFT_TOKEN_VIEWER = TOKENS.viewer;
  process.env.WEARSHIFT_TOKEN_RESPONDER = TOKENS.responder;

  const app = Fastify();
  await app.register(incidentRoutes, { store: announcingActions(store, (e) => hub.publish(e)) });
  await app.register(seriesRoutes, {
    loadInput: async (unit, component) => {
      const list = samples.get(componentKey({ unit, component }));
      if (list === undefined) return undefined;
      const settings = resolveSettings(config, list[0]!);
      return inputOf({ unit, component, group: settings.group, samples: list.length, lastSampledAt: list.at(-1)!.sampledAt }, settings, list, () => undefined);
    },
  });
  await app.register(eventRoutes, { hub });
  await app.register(boardRoutes);
  const address = await app.listen({ host: '127.0.0.1', port: 0 });

  const feed = async (unit: string, component: string) => {
    const list = samples.get(componentKey({ unit, component }));
    if (list === undefined) throw new Error(`no demo samples for ${unit}/${component}`);
    const settings = resolveSettings(config, list[0]!);
    const { steps } = evaluateComponent(list, settings);
    const result = await store.applySteps({ unit, component }, steps, { group: settings.group, now: new Date(), quietBefore: new Date(0) });
    const changes = incidentChanges(result.before, result.state);
    for (const change of changes) hub.publish(incidentEvent(change));
    return changes.length;
  };

  return {
    url: address,
    app,
    hub,
    store,
    feed,
    async close() {
      await app.close();
      await redis.dispose();
    },
  };
}
