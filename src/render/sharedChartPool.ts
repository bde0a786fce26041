/**
 * The chart pool of the queue workers of this process (incident e-mail charts): one thread, the default time
 * limit and sample budget. Created on first use; its thread does not keep the process alive.
 */
import { ChartPool } from './chartPool.ts';

let shared: ChartPool | undefined;

export function sharedChartPool(): ChartPool {
  shared ??= new ChartPool({ concurrency: 1 });
  return shared;
}
