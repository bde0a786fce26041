/** The false-alarm budget's defaults (configuration `detection.budget`), apart from the schema so that help texts can name them cheaply. */

/** Typical operating hours between samples. */
export const DEFAULT_SAMPLE_INTERVAL_HOURS = 250;
/** Operating hours per calendar year: a machine that runs day and night. */
export const DEFAULT_HOURS_PER_YEAR = 8760;
