/** The words that travel with every finding and forecast that reaches a person or another system. */

/** What the tool is and is not. */
export const ADVISORY_CAUTION =
  "wearshift advises; the laboratory's diagnosis and the equipment maker's limits decide; local codes and licensed practice apply.";

/** What a time-to-limit forecast rests on. */
export const FORECAST_CAUTION = 'A forecast assumes the present rate continues; wear can speed up or settle at any time.';
