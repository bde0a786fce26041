/**
 * The forecast outcomes the webhook and MQTT data may carry are the ones the forecast gives, all of them: the
 * published AsyncAPI schema (schemas/asyncapi.json) takes its list from the type's one source, so a forecast that
 * says a reading is beyond its level already validates, and an outcome the code never gives does not. (An incident
 * leaves the levels already crossed out of its forecast today, since its findings say so; the schema does not depend
 * on that choice.) Simulated data: the documented noise model.
 */
import { readFileSync } from 'node:fs';
import { Ajv2020 } from 'ajv/dist/2020.js';
import { describe, expect, it } from 'vitest';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import { forecastComponent } from '../../src/analysis/forecast/forecastComponent.ts';
import { FORECAST_OUTCOMES } from '../../src/analysis/forecast/model.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { applySteps } from '../../src/incidents/applySteps.ts';
import { emptyComponentIncidents, type NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { toCloudEvent } from '../../src/notify/cloudEvent.ts';
import { incidentMessage } from '../../src/notify/incidentMessage.ts';
import { simulatedSamples } from '../helpers/wearFleet.ts';

type Json = Record<string, any>; // eslint-disable-line @typescript-eslint/no-explicit-any

const published = JSON.parse(readFileSync(new URL('../../schemas/asyncapi.json', import.meta.url), 'utf8')) as Json;
const ajv = new Ajv2020({ strict: false, allErrors: true });
const validateEvent = ajv.compile(published.components.schemas.IncidentCloudEvent as Json);

// Levels the simulated gearbox passes early, so that its latest reading lies beyond the caution level already.
const config = parseConfig(`
detection:
  measurands: [Fe]
  labNoise: { absolute: 1, relative: 0.05 }
  runningInHours: 0
  budget: { sampleIntervalHours: 120 }
channels:
  webhooks: [{ name: ops, url: "https://ops.example/hooks", secrets: [WEBHOOK_SECRET] }]
escalation:
  policies: [{ name: all, tiers: [{ afterMinutes: 0, webhooks: [ops] }] }]
groups:
  - name: sim-gearboxes
    sumpLitres: 200
    residualFraction: 0.1
    chargeHours: 1000
    limits: { Fe: { caution: 4, alarm: 400 } }
`);

describe('forecast outcomes in the published event schema', () => {
  it('lists every outcome the forecast gives, and refuses one it never gives', () => {
    const outcome = published.components.schemas.IncidentCloudEvent.properties.data.properties.forecast.properties.items.items.properties.outcome as Json;
    expect(outcome.enum).toEqual([...FORECAST_OUTCOMES]);
  });

  it('a message with every limit of a real forecast, one of them crossed already, validates; an unknown outcome does not', () => {
    const samples = simulatedSamples({ samples: 33, intervalHours: 120 }, 13);
    const settings = resolveSettings(config, samples[0]!);
    const evaluation = evaluateComponent(samples, settings);
    const forecast = forecastComponent(evaluation.state, settings, undefined);
    const last = samples[samples.length - 1]!;
    const finding: Finding = {
      unit: last.unit,
      component: last.component,
      group: settings.group,
      measurand: 'Fe',
      rule: 'limit',
      disposition: 'incident',
      severity: 'caution',
      value: 20,
      threshold: 4,
      basis: 'reading',
      sampleId: last.sampleId,
      sampledAt: last.sampledAt,
      explanation: 'Fe above its caution level.',
    };
    const now = new Date(last.time + 3_600_000);
    const result = applySteps(emptyComponentIncidents(last.unit, last.component), [{ sampleId: last.sampleId, sampledAt: last.sampledAt, findings: [finding], forecast }], {
      group: settings.group,
      now,
      quietBefore: new Date(now.getTime() - 30 * 86_400_000),
      rules: incidentRules(config),
    });
    const found = result.effects.find((e): e is NotifyEffect => e.kind === 'notify')!;
    // The message as the channels would send it for an incident carrying each limit the forecast gave.
    const limits = forecast.measurands.flatMap((m) => m.limits);
    expect(limits.map((l) => l.outcome).sort()).toEqual(['after-oil-change', 'already']);
    const effect = { ...found, incident: { ...found.incident, forecast: limits } };
    const event = JSON.parse(JSON.stringify(toCloudEvent(incidentMessage(effect, samples, 'https://wearshift.example'), { time: now }))) as Json;
    const outcomes = (event.data.forecast.items as { outcome: string }[]).map((i) => i.outcome);
    expect(outcomes.sort()).toEqual(['after-oil-change', 'already']);
    expect(validateEvent(event), ajv.errorsText(validateEvent.errors)).toBe(true);
    event.data.forecast.items[0].outcome = 'soon';
    expect(validateEvent(event)).toBe(false);
  });
});
