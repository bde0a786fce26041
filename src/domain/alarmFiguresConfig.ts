/**
 * The `alarmFigures` section: thresholds of the alarm-management key figures (ISA-18.2 / IEC 62682, EEMUA 191) that
 * `wearshift backtest`, `wearshift design noise` and `/metrics` report. Oil samples arrive days or weeks apart, so
 * the thresholds are in days where a control room counts minutes; the defaults are about three sample intervals of
 * 250 operating hours (common practice for the interval, see detection.budget.sampleIntervalHours).
 */
import { z } from 'zod';

const positive = z.number().finite().positive();

export const AlarmFiguresSchema = z
  .object({
    standingAfterDays: positive
      .default(30)
      .describe('An incident in the active alarm state (acknowledged or not) for longer than this counts as standing.'),
    staleAfterDays: positive
      .default(7)
      .describe('An open incident that stays unacknowledged (and not shelved) for longer than this counts as stale.'),
    chatteringWithinDays: positive
      .default(30)
      .describe('An incident active again within this many days after its return to normal or closing, or a new incident of the same key within it, counts as chattering.'),
    topBadActors: z.number().int().min(1).max(50).default(10).describe('How many components and rule/measurand pairs the bad-actor lists show.'),
    liveWindowDays: positive
      .max(366)
      .default(30)
      .describe('/metrics: the trailing window of the rate figures (ISA-18.2 asks for at least 30 days of data before its benchmarks are compared).'),
    maxIncidents: z
      .number()
      .int()
      .min(10)
      .max(100_000)
      .default(5000)
      .describe('/metrics: incidents read per computation at most (open ones first, then those closed within the window, newest first); a gauge tells when the cap was hit.'),
    refreshSeconds: positive.default(60).describe('/metrics: the figures are computed at most this often; scrapes in between get the last figures.'),
  })
  .strict();
export type AlarmFiguresConfig = z.infer<typeof AlarmFiguresSchema>;
