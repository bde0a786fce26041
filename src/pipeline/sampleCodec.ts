/**
 * The compact stored form of a sample: a JSON array without the component's identity (it is in the key), without
 * defaults, and with the readings as the lab wrote them ("Fe=12;Si=<1;iso4406=18/16/13"), in measurand order so
 * that a redelivery listing them in another order is recognised as the same result. About a third of the plain JSON.
 *
 * [sampleId, revision, time, unitHours|null, oilHours|null, flags, topUpLitres, group|null, lab|null, readings]
 * flags: 1 oilChanged, 2 componentChanged.
 */
import type { Sample } from '../domain/event.ts';
import { isMeasurand, type Measurand } from '../domain/measurands.ts';
import { formatReading, parseReading, type Reading } from '../domain/reading.ts';

type Encoded = [string, number, number, number | null, number | null, number, number, string | null, string | null, string];

export function encodeSample(s: Sample): string {
  const readings = (Object.entries(s.readings) as [Measurand, Reading][])
    .sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0))
    .map(([m, r]) => `${m}=${formatReading(r)}`)
    .join(';');
  const flags = (s.oilChanged ? 1 : 0) | (s.componentChanged ? 2 : 0);
  const row: Encoded = [s.sampleId, s.revision, s.time, s.unitHours ?? null, s.oilHours ?? null, flags, s.topUpLitres, s.group ?? null, s.lab ?? null, readings];
  return JSON.stringify(row);
}

export function decodeSample(text: string, ref: { unit: string; component: string }): Sample {
  const [sampleId, revision, time, unitHours, oilHours, flags, topUpLitres, group, lab, readingText] = JSON.parse(text) as Encoded;
  const readings: Partial<Record<Measurand, Reading>> = {};
  if (readingText !== '') {
    for (const part of readingText.split(';')) {
      const eq = part.indexOf('=');
      const m = part.slice(0, eq);
      const raw = part.slice(eq + 1);
      if (!isMeasurand(m)) throw new Error(`stored sample ${sampleId}: unknown measurand ${m}`);
      const parsed = parseReading(m === 'iso4406' ? raw : /^[<>]/.test(raw) ? raw : Number(raw), m);
      if (!parsed.ok) throw new Error(`stored sample ${sampleId}: ${m}: ${parsed.reason}`);
      readings[m] = parsed.reading;
    }
  }
  return {
    sampleId,
    revision,
    unit: ref.unit,
    component: ref.component,
    sampledAt: new Date(time).toISOString(),
    time,
    oilChanged: (flags & 1) !== 0,
    componentChanged: (flags & 2) !== 0,
    topUpLitres,
    readings,
    ...(group !== null && { group }),
    ...(unitHours !== null && { unitHours }),
    ...(oilHours !== null && { oilHours }),
    ...(lab !== null && { lab }),
  };
}
