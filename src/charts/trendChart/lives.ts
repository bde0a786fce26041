/** Points grouped by the detector life they belong to (a detector starts afresh after a reset), in order. */
export function lives<T extends { life: number }>(points: readonly T[]): T[][] {
  const out = new Map<number, T[]>();
  for (const p of points) out.set(p.life, [...(out.get(p.life) ?? []), p]);
  return [...out.values()];
}
