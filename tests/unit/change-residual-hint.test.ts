/**
 * A change finding on the first sample after an oil change, judged with the built-in residual share because the site
 * set none, says so and names the setting that removes the doubt; with the share configured, or on a sample inside a
 * charge, it does not. Invented series: a gearbox gaining 10 ppm of iron per 250 h, drained every 2 000 h with 40 % of
 * the old oil left behind (some sumps, hydraulics above all, keep up to about 40 %: common practice, from memory), exact readings.
 */
import { describe, expect, it } from 'vitest';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { parseResultEvent, type Sample } from '../../src/domain/event.ts';
import { resolveSettings } from '../../src/domain/settings.ts';

const RESIDUAL = 0.4;
const HOURS = 250;

function series(n: number): Sample[] {
  const out: Sample[] = [];
  let level = 0;
  let oilHours = 0;
  for (let i = 0; i < n; i++) {
    const drained = i > 0 && oilHours + HOURS > 2000;
    level = (drained ? RESIDUAL * level : level) + 10;
    oilHours = drained ? HOURS : oilHours + HOURS;
    const parsed = parseResultEvent({
      sampleId: `GB-${String(i + 1).padStart(3, '0')}`,
      unit: 'GB-7',
      component: 'gearbox',
      sampledAt: new Date(Date.UTC(2025, 0, 1) + (i + 1) * HOURS * 3_600_000).toISOString(),
      unitHours: (i + 1) * HOURS,
      oilHours,
      oilChanged: drained,
      readings: { Fe: Math.round(level * 10) / 10 },
    });
    if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
    out.push(parsed.sample);
  }
  return out;
}

const HINT = 'set residualFraction for the group';

function changeFindings(configText: string) {
  const samples = series(60);
  const settings = resolveSettings(parseConfig(configText), { unit: 'GB-7', component: 'gearbox' });
  const ev = evaluateComponent(samples, settings);
  return ev.steps.flatMap((s, i) =>
    s.findings.filter((f) => f.rule === 'ewma' || f.rule === 'cusum' || (f.rule === 'sampling' && f.measurand === 'Fe')).map((f) => ({ f, drain: samples[i]!.oilChanged })),
  );
}

describe('a change finding at the first sample after an oil change', () => {
  it('with no residualFraction set, says the built-in share was assumed and names the setting', () => {
    const found = changeFindings('');
    const atDrain = found.filter((x) => x.drain && x.f.rule !== 'sampling');
    expect(atDrain.length).toBeGreaterThan(0);
    for (const { f } of atDrain) {
      expect(f.explanation).toContain(HINT);
      expect(f.explanation).toContain('10 % of the old oil');
      expect(f.explanation).toContain('group gearbox');
    }
    for (const { f } of found.filter((x) => !x.drain)) expect(f.explanation).not.toContain(HINT);
  });

  it('with the share configured, neither the bias nor the hint', () => {
    const found = changeFindings(`defaults:\n  residualFraction: ${RESIDUAL}\n`);
    for (const { f } of found) expect(f.explanation).not.toContain(HINT);
    expect(found.filter((x) => x.drain && x.f.rule !== 'sampling')).toHaveLength(0);
  });
});
