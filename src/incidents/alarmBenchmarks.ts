/**
 * Published reference figures of alarm management, for comparison beside the measured ones. They were written for
 * control-room operators of process plants, who answer alarms within minutes; an oil-analysis responder gets far fewer
 * incidents, so the product's own target is the false-alarm budget (detection.budget). Values recalled from memory of
 * the documents named; check the current editions before quoting them.
 */
export interface AlarmBenchmark {
  readonly figure: string;
  readonly value: string;
  readonly source: string;
}

/** Annunciations per responder per day that the standards call very likely acceptable, and the most that is manageable. */
export const ACCEPTABLE_PER_DAY = 150;
export const MANAGEABLE_PER_DAY = 300;
/** Stale alarms present on any day, at most (ISA-18.2). */
export const STALE_AT_ONCE = 5;
/** Standing alarms at any time, at most (EEMUA 191). */
export const STANDING_AT_ONCE = 10;

export const ALARM_BENCHMARKS: readonly AlarmBenchmark[] = [
  { figure: 'alarms per operator per day', value: `~${ACCEPTABLE_PER_DAY} very likely acceptable, ~${MANAGEABLE_PER_DAY} maximum manageable`, source: 'ISA-18.2 / IEC 62682 performance table (from memory)' },
  { figure: 'alarms per operator per 10 minutes, long-term average', value: '~1 very likely acceptable, ~2 maximum manageable', source: 'EEMUA 191 and ISA-18.2 (from memory)' },
  { figure: 'stale alarms', value: `fewer than ${STALE_AT_ONCE} present on any day`, source: 'ISA-18.2 (from memory)' },
  { figure: 'standing alarms', value: `fewer than ${STANDING_AT_ONCE} at any time`, source: 'EEMUA 191 (from memory)' },
  { figure: 'chattering and fleeting alarms', value: 'zero', source: 'ISA-18.2 (from memory)' },
  { figure: 'share of the 10 most frequent alarms in the load', value: '~1 % to 5 % at most', source: 'ISA-18.2 (from memory)' },
];
