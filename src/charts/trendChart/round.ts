/** A pixel position to one decimal, so that the SVG stays short and the same input gives the same string. */
export function r(v: number): number {
  return Math.round(v * 10) / 10;
}
