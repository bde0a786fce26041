/**
 * The stored forms of a sample. The earlier one, still read and recognised: a JSON array without the component's identity (it is in the key), without
 * defaults, and with the readings as the lab wrote them ("Fe=12;Si=<1;iso4406=18/16/13"), in measurand order so
 * that a redelivery listing them in another order is recognised as the same result. About a third of the plain JSON.
 *
 * [sampleId, revision, time, unitHours|null, oilHours|null, flags, topUpLitres, group|null, lab|null, readings]
 * flags: 1 oilChanged, 2 componentChanged. The shorter one the store writes now is described at encodeSampleCore.
 */
import type { Sample } from '../domain/event.ts';
import { isMeasurand, type Measurand } from '../domain/measurands.ts';
import { formatReading, MAX_READING, parseReading, type Reading } from '../domain/reading.ts';

type Encoded = [string, number, number, number | null, number | null, number, number, string | null, string | null, string];

function readingsText(s: Sample): string {
  return (Object.entries(s.readings) as [Measurand, Reading][])
    .sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0))
    .map(([m, r]) => `${m}=${formatReading(r)}`)
    .join(';');
}

function parseReadings(readingText: string, sampleId: string): Partial<Record<Measurand, Reading>> {
  const readings: Partial<Record<Measurand, Reading>> = {};
  if (readingText !== '') {
    for (const part of readingText.split(';')) {
      const eq = part.indexOf('=');
      const m = part.slice(0, eq);
      const raw = part.slice(eq + 1);
      if (!isMeasurand(m)) throw new Error(`stored sample ${sampleId}: unknown measurand ${m}`);
      // Read back with the bound it was accepted under: a reading stored before the bounds by unit stays readable.
      const parsed = parseReading(m === 'iso4406' ? raw : /^[<>]/.test(raw) ? raw : Number(raw), m, { max: MAX_READING });
      if (!parsed.ok) throw new Error(`stored sample ${sampleId}: ${m}: ${parsed.reason}`);
      readings[m] = parsed.reading;
    }
  }
  return readings;
}

/** The earlier stored form (read, and compared with for a redelivery of a sample stored in it). */
export function encodeSample(s: Sample): string {
  const readings = readingsText(s);
  const flags = (s.oilChanged ? 1 : 0) | (s.componentChanged ? 2 : 0);
  const row: Encoded = [s.sampleId, s.revision, s.time, s.unitHours ?? null, s.oilHours ?? null, flags, s.topUpLitres, s.group ?? null, s.lab ?? null, readings];
  return JSON.stringify(row);
}

export function decodeSample(text: string, ref: { unit: string; component: string }): Sample {
  const [sampleId, revision, time, unitHours, oilHours, flags, topUpLitres, group, lab, readingText] = JSON.parse(text) as Encoded;
  return assembleSample({ sampleId, revision, ref, time, flags, topUpLitres, readingText, group: group ?? undefined, lab: lab ?? undefined, unitHours: unitHours ?? undefined, oilHours: oilHours ?? undefined });
}

interface SampleParts {
  readonly sampleId: string;
  readonly revision: number;
  readonly ref: { unit: string; component: string };
  readonly time: number;
  readonly flags: number;
  readonly topUpLitres: number;
  readonly readingText: string;
  readonly group: string | undefined;
  readonly lab: string | undefined;
  readonly unitHours: number | undefined;
  readonly oilHours: number | undefined;
}

/** The sample both stored forms decode to. */
function assembleSample(p: SampleParts): Sample {
  return {
    sampleId: p.sampleId,
    revision: p.revision,
    unit: p.ref.unit,
    component: p.ref.component,
    sampledAt: new Date(p.time).toISOString(),
    time: p.time,
    oilChanged: (p.flags & 1) !== 0,
    componentChanged: (p.flags & 2) !== 0,
    topUpLitres: p.topUpLitres,
    readings: parseReadings(p.readingText, p.sampleId),
    ...(p.group !== undefined && { group: p.group }),
    ...(p.unitHours !== undefined && { unitHours: p.unitHours }),
    ...(p.oilHours !== undefined && { oilHours: p.oilHours }),
    ...(p.lab !== undefined && { lab: p.lab }),
  };
}

/**
 * The shorter stored form of a sample (the store's layout since the storage diet), small enough that a component's
 * revisions fit Redis's compact hash encoding with the server's defaults for a typical sample: the sampleId and the
 * revision are left out (they name the stored field), the time is in base 36, defaults are empty, and the group and
 * the lab are `*` when they are the component's common ones (those of its first stored sample, kept beside the
 * revisions and never changed), so a sample's stored form depends on the sample and that fixed pair only.
 *
 * core: `time36,unitHours,oilHours,flags,topUpLitres,readings`; stored: `core,group,lab` (group and lab: '' absent,
 * `*` common, else the text: identifiers hold no commas).
 */
export function encodeSampleCore(s: Sample): string {
  if (!Number.isSafeInteger(s.time)) throw new RangeError(`sample ${s.sampleId}: time ${s.time} is not a whole number of milliseconds`);
  const flags = (s.oilChanged ? 1 : 0) | (s.componentChanged ? 2 : 0);
  return [s.time.toString(36), s.unitHours ?? '', s.oilHours ?? '', flags === 0 ? '' : flags, s.topUpLitres === 0 ? '' : s.topUpLitres, readingsText(s)].join(',');
}

/** The common group and lab of a component's revisions, as kept: `group,lab` ('' when absent). */
export function commonText(group: string | undefined, lab: string | undefined): string {
  return `${group ?? ''},${lab ?? ''}`;
}

/** The stored form of a sample from its core, its group and lab, and the component's common pair (`group,lab`). */
export function composeStoredSample(core: string, group: string | undefined, lab: string | undefined, common: string): string {
  const comma = common.indexOf(',');
  const part = (v: string | undefined, c: string) => (v === undefined || v === '' ? '' : v === c ? '*' : v);
  return `${core},${part(group, common.slice(0, comma))},${part(lab, common.slice(comma + 1))}`;
}

/** True for the shorter form; the earlier one (encodeSample) is a JSON array. */
export function isCompactSample(text: string): boolean {
  return !text.startsWith('[');
}

export function decodeCompactSample(text: string, sampleId: string, revision: number, common: string, ref: { unit: string; component: string }): Sample {
  const parts = text.split(',');
  if (parts.length !== 8) throw new Error(`stored sample ${sampleId}: ${parts.length} parts, not 8`);
  const [time36, unitHours, oilHours, flagText, topUp, readingText, groupPart, labPart] = parts as [string, string, string, string, string, string, string, string];
  const comma = common.indexOf(',');
  const whole = (p: string, c: string) => (p === '' ? undefined : p === '*' ? c : p);
  const group = whole(groupPart, common.slice(0, comma));
  const lab = whole(labPart, common.slice(comma + 1));
  return assembleSample({
    sampleId,
    revision,
    ref,
    time: parseInt(time36, 36),
    flags: flagText === '' ? 0 : Number(flagText),
    topUpLitres: topUp === '' ? 0 : Number(topUp),
    readingText,
    group,
    lab,
    unitHours: unitHours === '' ? undefined : Number(unitHours),
    oilHours: oilHours === '' ? undefined : Number(oilHours),
  });
}
