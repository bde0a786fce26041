import { describe, expect, it } from 'vitest';
import { buildHistory } from '../../src/analysis/history.ts';
import type { Sample } from '../../src/domain/event.ts';
import { sample } from './history-fixtures.ts';

const ids = (samples: readonly Sample[]) => samples.map((s) => s.sampleId);

describe('buildHistory: revisions', () => {
  it('keeps the highest revision of a sample and lists the ones it replaced', () => {
    const rev0 = sample(1, { sampleId: 'LAB-1', revision: 0, readings: { Fe: 10 } });
    const rev2 = sample(1, { sampleId: 'LAB-1', revision: 2, readings: { Fe: 12 } });
    const rev1 = sample(1, { sampleId: 'LAB-1', revision: 1, readings: { Fe: 11 } });
    const other = sample(2, { sampleId: 'LAB-2', readings: { Fe: 13 } });
    const h = buildHistory([rev0, rev2, other, rev1]);
    expect(h.samples).toEqual([rev2, other]);
    expect(h.superseded).toEqual([
      { sampleId: 'LAB-1', revision: 0, replacedBy: 2 },
      { sampleId: 'LAB-1', revision: 1, replacedBy: 2 },
    ]);
  });

  it('takes a revision delivered twice as one result', () => {
    const s = sample(1, { sampleId: 'LAB-1', revision: 1, readings: { Fe: 10 } });
    const h = buildHistory([s, { ...s }]);
    expect(h.samples).toHaveLength(1);
    expect(h.superseded).toEqual([]);
  });

  it('orders a re-issued result by its own sampling time', () => {
    const a = sample(1, { sampleId: 'A', readings: { Fe: 10 } });
    const b = sample(5, { sampleId: 'B', readings: { Fe: 10 } });
    const aCorrected = sample(9, { sampleId: 'A', revision: 1, readings: { Fe: 11 } });
    expect(ids(buildHistory([a, b, aCorrected]).samples)).toEqual(['B', 'A']);
  });
});

describe('buildHistory: order', () => {
  it('orders by sampling time, equal times by unit hours, then by sample id', () => {
    const late = sample(3, { sampleId: 'Z', readings: { Fe: 1 } });
    const tieHigh = sample(2, { sampleId: 'A', unitHours: 900, readings: { Fe: 1 } });
    const tieLow = sample(2, { sampleId: 'B', unitHours: 800, readings: { Fe: 1 } });
    const tieNoHoursY = sample(2, { sampleId: 'Y', readings: { Fe: 1 } });
    const tieNoHoursX = sample(2, { sampleId: 'X', readings: { Fe: 1 } });
    const early = sample(1, { sampleId: 'M', readings: { Fe: 1 } });
    const h = buildHistory([late, tieNoHoursY, tieHigh, early, tieNoHoursX, tieLow]);
    expect(ids(h.samples)).toEqual(['M', 'B', 'A', 'X', 'Y', 'Z']);
    expect(h.unit).toBe('PS2-P3');
    expect(h.component).toBe('gearbox');
  });

  it('gives an empty history for no samples', () => {
    expect(buildHistory([])).toEqual({ unit: '', component: '', samples: [], charges: [], superseded: [] });
  });
});

describe('buildHistory: charges', () => {
  it('starts a charge at an oil change, a fall in oil hours and a component change', () => {
    const s = [
      sample(1, { oilHours: 100, readings: { Fe: 5 } }),
      sample(2, { oilHours: 300, readings: { Fe: 9 } }),
      sample(3, { oilHours: 50, oilChanged: true, readings: { Fe: 3 } }),
      sample(4, { oilHours: 250, readings: { Fe: 6 } }),
      sample(5, { oilHours: 20, readings: { Fe: 2 } }),
      sample(6, { oilHours: 220, readings: { Fe: 4 } }),
      sample(7, { oilHours: 10, oilChanged: true, componentChanged: true, readings: { Fe: 8 } }),
    ];
    const h = buildHistory([...s].reverse());
    expect(h.charges.map((c) => [c.index, c.startedBy, c.samples.length])).toEqual([
      [0, 'first', 2],
      [1, 'oilChanged', 2],
      [2, 'oilHoursReset', 2],
      [3, 'componentChanged', 1],
    ]);
    expect(h.charges.flatMap((c) => c.samples)).toEqual(h.samples);
  });

  it('compares oil hours with the last sample of the charge that has them', () => {
    const h = buildHistory([
      sample(1, { oilHours: 400, readings: { Fe: 5 } }),
      sample(2, { readings: { Fe: 6 } }),
      sample(3, { oilHours: 100, readings: { Fe: 2 } }),
    ]);
    expect(h.charges.map((c) => c.startedBy)).toEqual(['first', 'oilHoursReset']);
    expect(h.charges[0]!.samples).toHaveLength(2);
  });

  it('keeps equal oil hours on one charge', () => {
    const h = buildHistory([sample(1, { oilHours: 300, readings: { Fe: 5 } }), sample(2, { oilHours: 300, readings: { Fe: 6 } })]);
    expect(h.charges).toHaveLength(1);
  });

  it('does not start a new charge at the first sample, whatever it says', () => {
    const h = buildHistory([sample(1, { oilHours: 0, oilChanged: true, componentChanged: true, readings: { Fe: 1 } })]);
    expect(h.charges.map((c) => c.startedBy)).toEqual(['first']);
  });
});

describe('buildHistory: odd input', () => {
  it('accepts missing hours, equal times and censored readings alike', () => {
    const h = buildHistory([
      sample(1, { sampleId: 'A', readings: { Fe: '<1', Cu: '<1' } }),
      sample(1, { sampleId: 'B', readings: { Fe: '<1' } }),
      sample(1, { sampleId: 'C', oilHours: 0, readings: { Fe: '>500' } }),
    ]);
    expect(ids(h.samples)).toEqual(['A', 'B', 'C']);
    expect(h.charges).toHaveLength(1);
  });

  it('puts a sample with an unreadable time last rather than failing', () => {
    const good = sample(2, { sampleId: 'A', readings: { Fe: 1 } });
    const broken = { ...sample(1, { sampleId: 'B', readings: { Fe: 1 } }), time: Number.NaN };
    expect(ids(buildHistory([broken, good]).samples)).toEqual(['A', 'B']);
  });
});
