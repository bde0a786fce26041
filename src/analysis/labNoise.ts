/**
 * The lab's repeatability as a variance: an absolute floor (near the detection limit the spread is fixed)
 * combined with a relative part (higher readings spread in proportion).
 */
import type { Detection } from '../domain/config.ts';

export function labVariance(noise: Detection['labNoise'], level: number): number {
  const relative = noise.relative * Math.max(level, 0);
  return noise.absolute ** 2 + relative ** 2;
}
