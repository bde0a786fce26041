/**
 * The one time format people read (e-mail, pages, board, command line): ISO 8601 to the minute with the zone.
 * Offsets checked against the IANA time zone database's rules for the named zones (from memory: US Eastern daylight
 * time UTC−4 from 8 March to 1 November 2026; Nepal UTC+5:45 all year; Central European time UTC+1 in winter).
 */
import { describe, expect, it } from 'vitest';
import { formatTime, isTimeZone, timeZoneNote } from '../../src/notify/format.ts';
import { ConfigSchema } from '../../src/domain/config.ts';

describe('formatTime', () => {
  it('writes UTC with Z, to the minute, without seconds or milliseconds', () => {
    expect(formatTime('2026-03-01T08:00:59.999Z')).toBe('2026-03-01T08:00Z');
    // ISO 8601 parsers read it back to the same minute.
    expect(Date.parse(formatTime('2026-03-01T08:07:30Z'))).toBe(Date.parse('2026-03-01T08:07:00Z'));
  });

  it('writes a site zone with its offset at that instant, summer time included', () => {
    expect(formatTime('2026-07-01T12:00:00Z', 'America/New_York')).toBe('2026-07-01T08:00-04:00');
    expect(formatTime('2026-01-15T12:00:00Z', 'America/New_York')).toBe('2026-01-15T07:00-05:00');
    expect(formatTime('2026-03-01T08:00:00Z', 'Asia/Kathmandu')).toBe('2026-03-01T13:45+05:45');
    expect(formatTime('2026-03-01T23:30:00Z', 'Europe/Berlin')).toBe('2026-03-02T00:30+01:00');
    for (const [iso, zone] of [['2026-07-01T12:00:00Z', 'America/New_York'], ['2026-03-01T08:00:00Z', 'Asia/Kathmandu']] as const) {
      expect(Date.parse(formatTime(iso, zone))).toBe(Date.parse(iso));
    }
  });

  it('shows an unreadable value as given, and states the zone once in words', () => {
    expect(formatTime('not a time')).toBe('not a time');
    expect(timeZoneNote()).toBe('Times are ISO 8601 in UTC (Z).');
    expect(timeZoneNote('Europe/Berlin')).toContain('site zone Europe/Berlin');
  });

  it('takes display.timeZone from the configuration, UTC by default, and refuses an unknown zone by name', () => {
    expect(ConfigSchema.parse({}).display.timeZone).toBe('UTC');
    expect(ConfigSchema.parse({ display: { timeZone: 'Europe/Berlin' } }).display.timeZone).toBe('Europe/Berlin');
    const bad = ConfigSchema.safeParse({ display: { timeZone: 'Mars/Olympus' } });
    expect(bad.success).toBe(false);
    expect(JSON.stringify(bad.error?.issues)).toContain('time zone');
    expect(isTimeZone('Mars/Olympus')).toBe(false);
  });
});
