/**
 * The `forecast` section of the configuration: how far ahead and how sure the time-to-limit forecasts are.
 * The planned charge length is a group setting (`chargeHours`), since it differs by compartment.
 */
import { z } from 'zod';

export const ForecastSchema = z
  .object({
    enabled: z.boolean().default(true).describe('Forecast when each configured limit is expected to be crossed (incidents, series, charts, messages).'),
    interval: z
      .object({
        lower: z.number().gt(0).lt(50).default(10).describe('Lower percentile of the stated interval.'),
        upper: z.number().gt(50).lt(100).default(90).describe('Upper percentile of the stated interval.'),
      })
      .strict()
      .default({ lower: 10, upper: 90 }),
    horizonHours: z
      .number()
      .finite()
      .positive()
      .default(2000)
      .describe('How far ahead, in operating hours, a forecast looks when the group sets no planned charge length (chargeHours) and no past charge shows one.'),
    minIntervals: z
      .number()
      .int()
      .min(1)
      .default(2)
      .describe('Wear intervals the filter must have judged on the present charge before a wear metal is forecast.'),
    minReadings: z
      .number()
      .int()
      .min(3)
      .default(4)
      .describe('Uncensored readings on the present charge needed to fit a trend to a measurand the filter does not watch (oil condition, contaminants).'),
    usageSamples: z
      .number()
      .int()
      .min(2)
      .default(6)
      .describe('Recent samples with unit hours from which the hours run per calendar day are taken, for the calendar date.'),
  })
  .strict();
export type ForecastConfig = z.infer<typeof ForecastSchema>;

export const DEFAULT_FORECAST: ForecastConfig = ForecastSchema.parse({});
