/** Numbers for output. */

/** JSON output keeps 12 significant digits: enough for any check, without binary noise such as 0.04999999999999982. */
export function tidy(x: number): number {
  return Number(x.toPrecision(12));
}
