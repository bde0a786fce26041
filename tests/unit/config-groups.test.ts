/**
 * Group names in the configuration: a component's settings are looked up by its group's name, so a second group of
 * the same name would silently take the first one's limits. The configuration refuses it, naming both entries.
 */
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { resolveSettings } from '../../src/domain/settings.ts';

describe('group names', () => {
  it('refuses a name used twice, naming both entries', () => {
    const yaml = `
groups:
  - { name: gearboxes, match: { component: gearbox }, sumpLitres: 5, limits: { Fe: { alarm: 100 } } }
  - { name: engines, match: { component: engine }, sumpLitres: 50 }
  - { name: gearboxes, match: { component: reducer }, sumpLitres: 12, limits: { Fe: { alarm: 300 } } }
  - { name: engines, match: { component: genset } }
`;
    const error = (() => {
      try {
        parseConfig(yaml, 'site.yaml');
      } catch (e) {
        return (e as Error).message;
      }
      return '';
    })();
    expect(error.split('\n')).toEqual([
      'site.yaml: invalid configuration',
      '  groups.2.name: "gearboxes" is also the name of groups.0; group names must be unique (groups.2 would get the settings of groups.0)',
      '  groups.3.name: "engines" is also the name of groups.1; group names must be unique (groups.3 would get the settings of groups.1)',
    ]);
  });

  it('gives each differently named group its own settings', () => {
    const config = parseConfig(`
groups:
  - { name: gearboxes, match: { component: gearbox }, sumpLitres: 5, limits: { Fe: { alarm: 100 } } }
  - { name: reducers, match: { component: reducer }, sumpLitres: 12, limits: { Fe: { alarm: 300 } } }
`);
    const reducer = resolveSettings(config, { unit: 'PS2-P3', component: 'reducer' });
    expect(reducer).toMatchObject({ group: 'reducers', sumpLitres: 12, limits: { Fe: { alarm: 300 } } });
    expect(resolveSettings(config, { unit: 'PS2-P3', component: 'gearbox' })).toMatchObject({ group: 'gearboxes', sumpLitres: 5 });
  });
});
