import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { groupOf, resolveSettings } from '../../src/domain/settings.ts';

describe('component settings', () => {
  const config = parseConfig(`
detection: { measurands: [Fe], ewma: { lambda: 0.1 }, runningInHours: 300 }
condition: { water: { caution: 400, alarm: 900 } }
defaults: { residualFraction: 0.2, limits: { Si: { caution: 20 } } }
groups:
  - name: pump-gearboxes
    match: { component: gearbox, unit: "^PS" }
    detection: { cusum: { h: 5 } }
    condition: { water: { alarm: 800 } }
    limits: { Fe: { caution: 100, alarm: 200 } }
`);

  it('a group overrides only the fields it names; everything else comes from the top level, not from built-in defaults', () => {
    const s = resolveSettings(config, { unit: 'PS1-P1', component: 'gearbox' });
    expect(s.group).toBe('pump-gearboxes');
    expect(s.detection.measurands).toEqual(['Fe']);
    expect(s.detection.ewma).toEqual({ enabled: true, lambda: 0.1 });
    expect(s.detection.cusum).toEqual({ enabled: true, k: 0.5, headstart: 0, h: 5 });
    expect(s.detection.runningInHours).toBe(300);
    expect(s.condition.water).toEqual({ caution: 400, alarm: 800 });
    expect(s.limits).toEqual({ Si: { caution: 20 }, Fe: { caution: 100, alarm: 200 } });
    expect(s.residualFraction).toBe(0.2);
  });

  it('an event naming its group wins; without a match the component name is the group', () => {
    expect(groupOf(config, { unit: 'PS1-P1', component: 'gearbox', group: 'special' })).toBe('special');
    expect(groupOf(config, { unit: 'GEN-1', component: 'engine' })).toBe('engine');
    expect(resolveSettings(config, { unit: 'GEN-1', component: 'engine' }).detection.cusum.h).toBeUndefined();
  });
});
