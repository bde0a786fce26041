/**
 * Sampling dates as labs write them, read with an explicit format (never guessed: 03/04/2026 is March in one
 * country and April in the next) and turned into UTC from the lab's time zone.
 */

const TOKENS: Record<string, { re: string; part: 'year' | 'year2' | 'month' | 'day' | 'hour' | 'minute' | 'second' }> = {
  YYYY: { re: '(\\d{4})', part: 'year' },
  YY: { re: '(\\d{2})', part: 'year2' },
  MM: { re: '(\\d{2})', part: 'month' },
  M: { re: '(\\d{1,2})', part: 'month' },
  DD: { re: '(\\d{2})', part: 'day' },
  D: { re: '(\\d{1,2})', part: 'day' },
  HH: { re: '(\\d{2})', part: 'hour' },
  H: { re: '(\\d{1,2})', part: 'hour' },
  mm: { re: '(\\d{2})', part: 'minute' },
  ss: { re: '(\\d{2})', part: 'second' },
};
const TOKEN = /YYYY|YY|MM|M|DD|D|HH|H|mm|ss/g;

export interface WallClock {
  readonly year: number;
  readonly month: number;
  readonly day: number;
  readonly hour: number;
  readonly minute: number;
  readonly second: number;
}

interface CompiledFormat {
  readonly text: string;
  readonly re: RegExp;
  readonly parts: readonly (typeof TOKENS)[string]['part'][];
}

export function compileFormat(format: string): CompiledFormat {
  const parts: CompiledFormat['parts'][number][] = [];
  let re = '';
  let last = 0;
  for (const m of format.matchAll(TOKEN)) {
    re += escape(format.slice(last, m.index));
    const t = TOKENS[m[0]]!;
    re += t.re;
    parts.push(t.part);
    last = m.index + m[0].length;
  }
  re += escape(format.slice(last));
  return { text: format, re: new RegExp(`^\\s*${re}\\s*$`), parts };
}

function escape(s: string): string {
  return s.replace(/[.*+?^${}()|[\]\\]/g, '\\$&').replace(/ /g, '\\s+');
}

/** Reads a wall-clock date and time with the first format that matches; undefined when none does or the date does not exist. */
export function readWallClock(text: string, formats: readonly CompiledFormat[]): WallClock | undefined {
  for (const f of formats) {
    const m = f.re.exec(text);
    if (!m) continue;
    const v = { year: NaN, month: NaN, day: NaN, hour: 0, minute: 0, second: 0 };
    f.parts.forEach((p, i) => {
      const n = Number(m[i + 1]);
      if (p === 'year2') v.year = 2000 + n;
      else v[p] = n;
    });
    if (isValid(v)) return v;
  }
  return undefined;
}

function isValid(v: WallClock): boolean {
  if (!Number.isInteger(v.year) || v.month < 1 || v.month > 12 || v.day < 1 || v.hour > 23 || v.minute > 59 || v.second > 59) return false;
  const d = new Date(Date.UTC(v.year, v.month - 1, v.day));
  return d.getUTCDate() === v.day && d.getUTCMonth() === v.month - 1;
}

const OFFSET = /^([+-])(\d{2}):?(\d{2})$/;

/** Checks a time-zone setting; the reason when it is none. */
export function timeZoneProblem(zone: string): string | undefined {
  if (zone === 'UTC' || zone === 'Z' || OFFSET.test(zone)) return undefined;
  try {
    new Intl.DateTimeFormat('en-US', { timeZone: zone });
    return undefined;
  } catch {
    return `"${zone}" is no time zone: use UTC, an offset such as +02:00 or an IANA name such as Europe/Berlin`;
  }
}

/** Epoch ms of a wall-clock time in `zone` (UTC, a fixed offset, or an IANA zone). */
export function toEpoch(w: WallClock, zone: string): number {
  const asUtc = Date.UTC(w.year, w.month - 1, w.day, w.hour, w.minute, w.second);
  if (zone === 'UTC' || zone === 'Z') return asUtc;
  const fixed = OFFSET.exec(zone);
  if (fixed) return asUtc - (fixed[1] === '-' ? -1 : 1) * (Number(fixed[2]) * 60 + Number(fixed[3])) * 60_000;
  // An IANA zone: the offset at the guessed instant, corrected once (exact except inside a DST change).
  let t = asUtc - zoneOffsetMs(asUtc, zone);
  t = asUtc - zoneOffsetMs(t, zone);
  return t;
}

/** Formatters are costly to build (about a millisecond each): one per zone, kept. */
const FORMATTERS = new Map<string, Intl.DateTimeFormat>();

function zoneOffsetMs(epoch: number, zone: string): number {
  let formatter = FORMATTERS.get(zone);
  if (formatter === undefined) {
    formatter = new Intl.DateTimeFormat('en-US', { timeZone: zone, hourCycle: 'h23', year: 'numeric', month: 'numeric', day: 'numeric', hour: 'numeric', minute: 'numeric', second: 'numeric' });
    FORMATTERS.set(zone, formatter);
  }
  const parts = formatter.formatToParts(new Date(epoch));
  const get = (type: string) => Number(parts.find((p) => p.type === type)?.value);
  return Date.UTC(get('year'), get('month') - 1, get('day'), get('hour'), get('minute'), get('second')) - Math.floor(epoch / 1000) * 1000;
}

/** A workbook date cell: the spreadsheet stores wall-clock time, which the reader hands over as if it were UTC. */
export function wallClockOfCell(d: Date): WallClock {
  return { year: d.getUTCFullYear(), month: d.getUTCMonth() + 1, day: d.getUTCDate(), hour: d.getUTCHours(), minute: d.getUTCMinutes(), second: d.getUTCSeconds() };
}

const ISO_WITH_ZONE = /^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2})(?::(\d{2})(\.\d+)?)?(Z|[+-]\d{2}:\d{2})$/;

/**
 * An ISO 8601 date-time with its zone, only when the date and time exist (no 30 February, no 24:00) and the offset is
 * one the world uses (−12:00 to +14:00): Date.parse alone would move 2026-02-30 to 2 March.
 */
function readIsoWithZone(t: string): number | undefined | null {
  const m = ISO_WITH_ZONE.exec(t);
  if (!m) return null;
  const w: WallClock = { year: Number(m[1]), month: Number(m[2]), day: Number(m[3]), hour: Number(m[4]), minute: Number(m[5]), second: Number(m[6] ?? 0) };
  if (!isValid(w)) return undefined;
  const zone = m[8]!;
  const offset = OFFSET.exec(zone);
  if (offset && (Number(offset[2]) * 60 + Number(offset[3]) > 14 * 60 || Number(offset[3]) > 59)) return undefined;
  return toEpoch(w, zone) + Math.round(Number(m[7] ?? 0) * 1000);
}
const ISO_LOCAL = compileFormat('YYYY-MM-DDTHH:mm:ss');
const ISO_LOCAL_MIN = compileFormat('YYYY-MM-DDTHH:mm');
const ISO_DATE = compileFormat('YYYY-MM-DD');

const COMPILED = new Map<string, CompiledFormat>();

function compiled(format: string): CompiledFormat {
  let c = COMPILED.get(format);
  if (c === undefined) {
    c = compileFormat(format);
    if (COMPILED.size < 100) COMPILED.set(format, c);
  }
  return c;
}

/** Reads text with the mapping's formats ("iso" included); epoch ms or undefined. */
export function readDate(text: string, formats: readonly string[], zone: string): number | undefined {
  const t = text.trim();
  for (const f of formats) {
    if (f === 'iso') {
      const zoned = readIsoWithZone(t);
      if (zoned !== null) return zoned;
      const w = readWallClock(t, [ISO_LOCAL, ISO_LOCAL_MIN, ISO_DATE]);
      if (w) return toEpoch(w, zone);
      continue;
    }
    const w = readWallClock(t, [compiled(f)]);
    if (w) return toEpoch(w, zone);
  }
  return undefined;
}
