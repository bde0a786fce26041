/** The stored forms of a sample: the shorter one reads back exactly, and the earlier JSON array still reads. */
import { describe, expect, it } from 'vitest';
import { parseResultEvent, type ResultEvent, type Sample } from '../../src/domain/event.ts';
import { commonText, composeStoredSample, decodeCompactSample, decodeSample, encodeSample, encodeSampleCore, isCompactSample } from '../../src/pipeline/sampleCodec.ts';

function sample(e: Partial<ResultEvent>): Sample {
  const parsed = parseResultEvent({ sampleId: 'S-1', unit: 'Haul truck 7', component: 'final drive', sampledAt: '2025-03-04T05:06:07.089Z', readings: { Fe: 10 }, ...e });
  if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
  return parsed.sample;
}

const ref = { unit: 'Haul truck 7', component: 'final drive' };
const samples = [
  sample({}),
  sample({ revision: 3, unitHours: 12_345.5, oilHours: 250, oilChanged: true, componentChanged: true, topUpLitres: 2.25, readings: { Fe: 12.5, Si: '<1', iso4406: '18/16/13', Cu: 0 } }),
  sample({ group: 'haul-trucks', lab: 'North lab (site 2)', sampledAt: '1999-12-31T23:59:59.999Z', readings: { Pb: 0.5 } }),
  sample({ group: 'haul-trucks', readings: { Fe: '>500' } }),
  sample({ lab: 'North lab (site 2)' }),
];

describe('the shorter stored form of a sample', () => {
  it('reads back exactly, with the group and lab the same as the common ones or not', () => {
    for (const common of [commonText('haul-trucks', 'North lab (site 2)'), commonText(undefined, undefined), commonText('other', 'South lab')]) {
      for (const s of samples) {
        const stored = composeStoredSample(encodeSampleCore(s), s.group, s.lab, common);
        expect(isCompactSample(stored)).toBe(true);
        expect(decodeCompactSample(stored, s.sampleId, s.revision, common, ref)).toEqual(s);
      }
    }
  });

  it('refers to the common group and lab and leaves out what the field names', () => {
    const s = samples[2]!;
    const stored = composeStoredSample(encodeSampleCore(s), s.group, s.lab, commonText(s.group, s.lab));
    expect(stored.endsWith(',*,*')).toBe(true);
    expect(stored).not.toContain(s.sampleId);
    expect(stored.length).toBeLessThan(encodeSample(s).length / 2);
  });

  it('lists the readings in measurand order, so a redelivery with another order is the same stored sample', () => {
    const a = sample({ readings: { Fe: 1, Cu: 2 } });
    const b = sample({ readings: { Cu: 2, Fe: 1 } });
    expect(encodeSampleCore(a)).toBe(encodeSampleCore(b));
  });

  it('tells the earlier JSON array apart and still reads it', () => {
    for (const s of samples) {
      const earlier = encodeSample(s);
      expect(isCompactSample(earlier)).toBe(false);
      expect(decodeSample(earlier, ref)).toEqual(s);
    }
  });
});
