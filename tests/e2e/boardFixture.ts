/**
 * The board's HTTP application for end-to-end tests: the real board, series, event and incident routes over a
 * real incident store in a private redis-server, fed with the invented demo fleet evaluated by the real core.
 */
import Fastify, { type FastifyInstance } from 'fastify';
import { AnalysisFold, emptyAnalysisState } from '../../src/analysis/fold/analysisFold.ts';
import { buildHistory } from '../../src/analysis/history.ts';
import { demoFleet } from '../../src/demo/fleet.ts';
import { loadConfig } from '../../src/runtime/loadConfig.ts';
import { componentKey, parseResultEvent, type Sample } from '../../src/domain/event.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { ackLinkRoutes } from '../../src/http/ackLinkRoutes.ts';
import { boardRoutes } from '../../src/http/boardRoutes.ts';
import { ackSummary } from '../../src/http/server.ts';
import type { IncidentEffect } from '../../src/incidents/model.ts';
import { announcingActions, createEventHub, type EventHub } from '../../src/http/eventHub.ts';
import { incidentEvent } from '../../src/pipeline/liveEvent.ts';
import { inputOf } from '../../src/render/componentInput.ts';
import { eventRoutes } from '../../src/http/eventRoutes.ts';
import { incidentRoutes } from '../../src/http/incidentRoutes.ts';
import { seriesRoutes } from '../../src/http/seriesRoutes.ts';
import { sampleVerdictRoutes } from '../../src/http/sampleVerdictRoutes.ts';
import type { SampleMark } from '../../src/analysis/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { RedisIncidents as RedisIncidentStore } from '../../src/redis/redisIncidents.ts';
import { incidentChanges } from '../../src/pipeline/incidentChanges.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';

/** The API's tokens, handed to the routes (never written into the process environment). */
const tokenEnv: NodeJS.ProcessEnv = {};

export const TOKENS = { viewer: 'board-viewer-token', responder: 'board-responder-token' };

export interface BoardFixture {
  readonly url: string;
  readonly app: FastifyInstance;
  readonly hub: EventHub;
  readonly store: RedisIncidentStore;
  /** The sample verdicts taken, in order. */
  readonly verdicts: { unit: string; component: string; sampleId: string; mark: SampleMark | null }[];
  /** Feeds a component's evaluated history to the incident store and publishes what changed, as the worker does. */
  feed(unit: string, component: string): Promise<number>;
  /** Stores an invented component's samples (all of one unit and component) and feeds it. */
  feedSamples(samples: readonly Sample[]): Promise<number>;
  /** The effects (messages to send) of every feed so far, as the worker's outbox holds them. */
  readonly effects: IncidentEffect[];
  /** The stored samples of a component, as the notify worker reads them for a message. */
  samples(unit: string, component: string): Sample[];
  close(): Promise<void>;
}

const config = loadConfig(new URL('../../demo/config.yaml', import.meta.url).pathname);

/**
 * An invented pump gearbox whose sixth bottle holds new oil, sent by mistake in the middle of a charge: a sampling
 * finding puts it in doubt.
 */
export const SAMPLE_DOUBT = { unit: 'PS9-P1', component: 'gearbox', sampleId: 'PS9-P1-G-6' } as const;

/**
 * The history of SAMPLE_DOUBT; for another invented unit (`PS9-P1` → its sample ids follow) shifted by whole days,
 * so that many such units open their incidents one after another.
 */
export function sampleInDoubtHistory(unit: string = SAMPLE_DOUBT.unit, shiftDays = 0): Sample[] {
  return [1, 2, 3, 4, 5, 6, 7].map((i) => {
    const readings = i === 6 ? { Fe: 1, Cu: '<1', Si: 4 } : { Fe: 8 + 6 * i, Cu: 2 + i, Si: 4 };
    const parsed = parseResultEvent({
      sampleId: `${unit}-G-${i}`,
      unit,
      component: SAMPLE_DOUBT.component,
      sampledAt: new Date(Date.UTC(2026, 0, 1 + i * 14 + shiftDays, 8)).toISOString(),
      unitHours: 1000 + i * 250,
      oilHours: i * 250,
      readings,
    });
    if (!parsed.ok) throw new Error(`invented event invalid: ${JSON.stringify(parsed.issues)}`);
    return parsed.sample;
  });
}

export interface BoardFixtureOptions {
  /** Serve the acknowledgement-link pages, links signed with this secret. */
  readonly ackSecret?: string;
  /** `display.timeZone` for the board and the pages. */
  readonly timeZone?: string;
}

export { config as demoConfig };

export async function startBoardFixture(components: readonly [string, string][], options: BoardFixtureOptions = {}): Promise<BoardFixture> {
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
  samples.set(componentKey(SAMPLE_DOUBT), sampleInDoubtHistory());
  const marks = new Map<string, Map<string, SampleMark>>();
  const verdicts: BoardFixture['verdicts'] = [];
  const marksOf = (key: string) => marks.get(key) ?? new Map<string, SampleMark>();
  const store = new RedisIncidentStore(redis.client(), { rules: incidentRules(config), prefix: '{board-e2e}' });
  const hub = createEventHub();
  tokenEnv.WEARSHIFT_TOKEN_VIEWER = TOKENS.viewer;
  tokenEnv.WEARSHIFT_TOKEN_RESPONDER = TOKENS.responder;

  const app = Fastify();
  await app.register(incidentRoutes, { tokens: accessTokensFromEnv(tokenEnv), store: announcingActions(store, (e) => hub.publish(e)) });
  await app.register(seriesRoutes, { tokens: accessTokensFromEnv(tokenEnv),
    loadInput: async (unit, component) => {
      const list = samples.get(componentKey({ unit, component }));
      if (list === undefined) return undefined;
      const settings = resolveSettings(config, list[0]!);
      return inputOf({ unit, component, group: settings.group, samples: list.length, lastSampledAt: list.at(-1)!.sampledAt }, settings, list, () => undefined, marksOf(componentKey({ unit, component })));
    },
  });
  // As the API and the worker do after a verdict: the mark is kept, who gave it goes into the timelines of the
  // incidents that hold the sample, and the component is judged again from the start.
  await app.register(sampleVerdictRoutes, { tokens: accessTokensFromEnv(tokenEnv),
    verdicts: {
      async mark(ref, sampleId, mark, by) {
        const key = componentKey(ref);
        if (!(samples.get(key) ?? []).some((s) => s.sampleId === sampleId)) return 'unknown';
        const kept = marksOf(key);
        if (mark === null) kept.delete(sampleId);
        else kept.set(sampleId, mark);
        marks.set(key, kept);
        verdicts.push({ unit: ref.unit, component: ref.component, sampleId, mark });
        await store.recordSampleVerdict(ref, { sampleId, verdict: mark ?? 'withdrawn', by, now: new Date() });
        await feed(ref.unit, ref.component);
        return 'taken';
      },
    },
  });
  await app.register(eventRoutes, { tokens: accessTokensFromEnv(tokenEnv), hub });
  await app.register(boardRoutes, { tokens: accessTokensFromEnv(tokenEnv), ...(options.timeZone !== undefined && { timeZone: options.timeZone }) });
  if (options.ackSecret !== undefined) {
    await app.register(ackLinkRoutes, {
      secrets: [options.ackSecret],
      acknowledge: async (incidentId, by, note) => {
        await announcingActions(store, (e) => hub.publish(e)).applyAction({ kind: 'acknowledge', incidentId, by, now: new Date(), ...(note !== undefined && { note }) });
      },
      describe: async (incidentId) => {
        const incident = await store.get(incidentId);
        return incident === undefined ? undefined : ackSummary(incident, options.timeZone);
      },
    });
  }
  const effects: IncidentEffect[] = [];
  const address = await app.listen({ host: '127.0.0.1', port: 0 });

  async function feed(unit: string, component: string) {
    const list = samples.get(componentKey({ unit, component }));
    if (list === undefined) throw new Error(`no demo samples for ${unit}/${component}`);
    const settings = resolveSettings(config, list[0]!);
    // As the worker folds them (src/pipeline/evaluateStored.ts): a step that asks for an incident carries the
    // time-to-limit forecast of its evidence's measurands.
    const fold = new AnalysisFold(settings, emptyAnalysisState(unit, component));
    const steps = buildHistory(list).samples.map((s) => {
      const step = fold.advance(s, undefined, marksOf(componentKey({ unit, component })).get(s.sampleId));
      const evidence = [...new Set(step.findings.filter((f) => f.disposition === 'incident' && f.rule !== 'sampling').map((f) => f.measurand))];
      const forecast = evidence.length > 0 ? fold.forecast(undefined, { measurands: evidence }) : undefined;
      return { ...step, ...(forecast !== undefined && { forecast }) };
    });
    const result = await store.applySteps({ unit, component }, steps, { group: settings.group, now: new Date(), quietBefore: new Date(0) });
    effects.push(...result.effects);
    const changes = incidentChanges(result.before, result.state);
    for (const change of changes) hub.publish(incidentEvent(change));
    return changes.length;
  }

  return {
    url: address,
    app,
    hub,
    store,
    verdicts,
    feed,
    async feedSamples(list) {
      const first = list[0]!;
      samples.set(componentKey(first), [...list]);
      return feed(first.unit, first.component);
    },
    effects,
    samples: (unit, component) => samples.get(componentKey({ unit, component })) ?? [],
    async close() {
      await app.close();
      await redis.dispose();
    },
  };
}
