/**
 * Remembers the results of a pure, expensive function by a key. The solvers run inside every evaluation with the same few
 * configurations, so a small cache (oldest entry dropped first) saves nearly all the work.
 */
export function memoize<A, R>(fn: (a: A) => R, key: (a: A) => string, capacity = 256): (a: A) => R {
  const cache = new Map<string, R>();
  return (a: A): R => {
    const k = key(a);
    if (cache.has(k)) return cache.get(k) as R;
    const value = fn(a);
    if (cache.size >= capacity) cache.delete(cache.keys().next().value as string);
    cache.set(k, value);
    return value;
  };
}
