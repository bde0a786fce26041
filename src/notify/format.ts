/**
 * How times and numbers read in messages and pages. One time format everywhere a person reads a time (e-mail,
 * acknowledgement page, board, `wearshift incidents`, `wearshift replay`): ISO 8601 to the minute with its zone,
 * `2026-03-01T08:00Z` in UTC (the default) or `2026-03-01T09:00+01:00` in the site zone `display.timeZone`. The
 * board (src/board/format.js) carries a copy of `formatTime` for the browser; an e2e test compares the two.
 */
import { oneLine } from '../domain/safeText.ts';

export const DEFAULT_TIME_ZONE = 'UTC';

const formatters = new Map<string, Intl.DateTimeFormat>();

function wallClock(timeZone: string): Intl.DateTimeFormat {
  let f = formatters.get(timeZone);
  if (f === undefined) {
    f = new Intl.DateTimeFormat('en-US', {
      timeZone,
      hourCycle: 'h23',
      year: 'numeric',
      month: '2-digit',
      day: '2-digit',
      hour: '2-digit',
      minute: '2-digit',
      second: '2-digit',
    });
    formatters.set(timeZone, f);
  }
  return f;
}

/** Whether the runtime knows the IANA zone name (`Europe/Berlin`, `UTC`). */
export function isTimeZone(name: string): boolean {
  try {
    wallClock(name);
    return true;
  } catch {
    return false;
  }
}

const pad = (n: number, width = 2) => String(Math.trunc(Math.abs(n))).padStart(width, '0');

/**
 * `2026-03-01T08:00Z` (UTC) or `2026-03-01T09:00+01:00` (any other zone): ISO 8601, to the minute, the zone
 * always written. An unreadable value is shown as given.
 */
export function formatTime(iso: string, timeZone: string = DEFAULT_TIME_ZONE): string {
  const t = new Date(iso);
  if (Number.isNaN(t.getTime())) return oneLine(iso);
  const ms = Math.floor(t.getTime() / 60_000) * 60_000;
  if (timeZone === 'UTC' || timeZone === 'Etc/UTC') return `${new Date(ms).toISOString().slice(0, 16)}Z`;
  const parts = Object.fromEntries(wallClock(timeZone).formatToParts(new Date(ms)).map((p) => [p.type, p.value]));
  const local = Date.UTC(Number(parts.year), Number(parts.month) - 1, Number(parts.day), Number(parts.hour), Number(parts.minute));
  const offset = Math.round((local - ms) / 60_000);
  const zone = offset === 0 ? 'Z' : `${offset < 0 ? '-' : '+'}${pad(offset / 60)}:${pad(offset % 60)}`;
  return `${parts.year}-${parts.month}-${parts.day}T${parts.hour}:${parts.minute}${zone}`;
}

/** The sentence that states the zone once, beside the times: "Times are UTC (ISO 8601)." */
export function timeZoneNote(timeZone: string = DEFAULT_TIME_ZONE): string {
  return timeZone === 'UTC' || timeZone === 'Etc/UTC'
    ? 'Times are ISO 8601 in UTC (Z).'
    : `Times are ISO 8601 in the site zone ${timeZone}, offset written with each time.`;
}

/** Integers as they are, other values to four significant digits (lab values carry no more). */
export function formatNumber(v: number): string {
  if (!Number.isFinite(v)) return String(v);
  return Number.isInteger(v) ? String(v) : String(Number(v.toPrecision(4)));
}
