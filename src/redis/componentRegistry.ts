/**
 * The components on record (every partition's registry, `components` of keys.ts), read a batch at a time with HSCAN
 * and cut at a limit: bounded in time and memory however many there are. Which ones a cut leaves out is not defined.
 */
import { partitionKeys, type ComponentRefLike, type Partitions } from './keys.ts';
import type { RedisConnection } from './connection.ts';

const SCAN_COUNT = 500;

export async function readComponentRegistry(redis: RedisConnection, partitions: Partitions, limit: number): Promise<ComponentRefLike[]> {
  const found = new Map<string, ComponentRefLike>();
  for (const n of partitions.all()) {
    const registry = partitionKeys(partitions.tag(n)).registry;
    let cursor = '0';
    do {
      const [next, flat] = await redis.hscan(registry, cursor, 'COUNT', SCAN_COUNT);
      // Fields are component keys, values the registry's JSON {unit, component, group}; HSCAN may repeat a field.
      for (let i = 0; i + 1 < flat.length; i += 2) {
        const { unit, component } = JSON.parse(flat[i + 1]!) as ComponentRefLike;
        found.set(flat[i]!, { unit, component });
        if (found.size >= limit) return [...found.values()];
      }
      cursor = next;
    } while (cursor !== '0');
  }
  return [...found.values()];
}
