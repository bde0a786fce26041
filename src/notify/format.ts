/** How times and numbers read in messages and pages. */
import { oneLine } from '../domain/safeText.ts';

/** "2026-03-01 08:00 UTC": unambiguous across the sites' time zones. */
export function formatTime(iso: string): string {
  const t = new Date(iso);
  if (Number.isNaN(t.getTime())) return oneLine(iso);
  return `${t.toISOString().slice(0, 16).replace('T', ' ')} UTC`;
}

/** Integers as they are, other values to four significant digits (lab values carry no more). */
export function formatNumber(v: number): string {
  if (!Number.isFinite(v)) return String(v);
  return Number.isInteger(v) ? String(v) : String(Number(v.toPrecision(4)));
}
