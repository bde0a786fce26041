/**
 * The trend chart an incident e-mail carries is of the measurand the e-mail's evidence leads with: most severe first,
 * then the finding furthest beyond its limit (value / limit), as the board's card charts it. Two alarms of one sample,
 * potassium just past its limit and water at two and a half times its own, chart water whatever order the rules
 * returned them in.
 */
import { describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import { parseResultEvent } from '../../src/domain/event.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { applySteps } from '../../src/incidents/applySteps.ts';
import { emptyComponentIncidents, type NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { incidentChart } from '../../src/notify/incidentChart.ts';
import { incidentMessage } from '../../src/notify/incidentMessage.ts';
import { MemoryStore } from '../../src/pipeline/memory/memoryStore.ts';

const config = ConfigSchema.parse({
  channels: { webhooks: [{ name: 'ops', url: 'https://ops.example/hooks', secrets: ['WEBHOOK_SECRET'] }] },
  escalation: { policies: [{ name: 'all', tiers: [{ afterMinutes: 0, webhooks: ['ops'] }] }] },
});
const K = [5, 8, 15, 27];
const WATER = [200, 400, 1200, 2664];

describe('the chart an incident e-mail carries', () => {
  it('is of the measurand the evidence leads with: the alarm furthest beyond its limit', async () => {
    const store = new MemoryStore();
    const samples = K.map((k, i) => {
      const parsed = parseResultEvent({
        sampleId: `GX-${i + 1}`,
        unit: 'GX-1',
        component: 'engine',
        sampledAt: new Date(Date.UTC(2026, 0, 10 + 14 * i)).toISOString(),
        oilHours: 250 * (i + 1),
        readings: { K: k, water: WATER[i]! },
      });
      if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
      return parsed.sample;
    });
    for (const s of samples) await store.store(s, 'engines', 0);
    const last = samples.at(-1)!;
    const base = { unit: 'GX-1', component: 'engine', group: 'engines', sampleId: last.sampleId, sampledAt: last.sampledAt, disposition: 'incident', severity: 'alarm', basis: 'reading' } as const;
    const potassium: Finding = { ...base, measurand: 'K', rule: 'limit', value: 27, threshold: 20, explanation: 'K 27 ppm is above the alarm level of 20 ppm.' };
    const water: Finding = { ...base, measurand: 'water', rule: 'condition', value: 2664, threshold: 1000, explanation: 'Water 2664 ppm is above the alarm level of 1000 ppm.' };
    for (const findings of [
      [potassium, water],
      [water, potassium],
    ]) {
      const now = new Date(Date.parse(last.sampledAt) + 3_600_000);
      const result = applySteps(emptyComponentIncidents('GX-1', 'engine'), [{ sampleId: last.sampleId, sampledAt: last.sampledAt, findings }], {
        group: 'engines',
        now,
        quietBefore: new Date(0),
        rules: incidentRules(config),
      });
      const effect = result.effects.find((e): e is NotifyEffect => e.kind === 'notify')!;
      expect(incidentMessage(effect, samples, 'https://wearshift.example').findings[0]!.measurand).toBe('water');
      const chart = await incidentChart(store, store, config, effect);
      expect(chart!.png.subarray(1, 4).toString()).toBe('PNG');
      expect(chart!.alt).toMatch(/^Trend of water \(water\) for GX-1 \/ engine/);
    }
  });
});
