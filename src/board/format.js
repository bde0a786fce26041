/*
 * Times and durations as the board writes them, in the site zone the server names (session.timeZone).
 */
import { session } from './session.js';

/**
 * One time format everywhere (the same as src/notify/format.ts, which e-mails and the command line use): ISO 8601
 * to the minute with its zone, 2026-03-01T08:00Z in UTC or 2026-03-01T09:00+01:00 in the site zone.
 */
const wallClocks = new Map();
export function formatTime(iso) {
  const t = new Date(iso);
  if (Number.isNaN(t.getTime())) return String(iso);
  const ms = Math.floor(t.getTime() / 60_000) * 60_000;
  const zone = session.timeZone;
  if (zone === 'UTC' || zone === 'Etc/UTC') return `${new Date(ms).toISOString().slice(0, 16)}Z`;
  let f = wallClocks.get(zone);
  if (f === undefined) {
    f = new Intl.DateTimeFormat('en-US', { timeZone: zone, hourCycle: 'h23', year: 'numeric', month: '2-digit', day: '2-digit', hour: '2-digit', minute: '2-digit', second: '2-digit' });
    wallClocks.set(zone, f);
  }
  const p = Object.fromEntries(f.formatToParts(new Date(ms)).map((x) => [x.type, x.value]));
  const offset = Math.round((Date.UTC(Number(p.year), Number(p.month) - 1, Number(p.day), Number(p.hour), Number(p.minute)) - ms) / 60_000);
  const pad = (n) => String(Math.trunc(Math.abs(n))).padStart(2, '0');
  return `${p.year}-${p.month}-${p.day}T${p.hour}:${p.minute}${offset === 0 ? 'Z' : `${offset < 0 ? '-' : '+'}${pad(offset / 60)}:${pad(offset % 60)}`}`;
}

export function timeZoneNote() {
  const zone = session.timeZone;
  return zone === 'UTC' || zone === 'Etc/UTC' ? 'Times are ISO 8601 in UTC (Z).' : `Times are ISO 8601 in the site zone ${zone}, offset written with each time.`;
}

export function duration(ms) {
  const minutes = Math.max(0, Math.floor(ms / 60_000));
  if (minutes < 60) return `${minutes} min`;
  const hours = Math.floor(minutes / 60);
  if (hours < 48) return `${hours} h ${String(minutes % 60).padStart(2, '0')} min`;
  return `${Math.floor(hours / 24)} days ${hours % 24} h`;
}
