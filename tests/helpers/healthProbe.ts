/**
 * Polls `${base}/healthz` every `everyMs` until stopped, while a test attacks the process: every probe must answer
 * 200. stop() returns the slowest answer, how many answered, and what failed.
 */
export function healthProbe(base: string, everyMs = 100) {
  let stopped = false;
  let slowest = 0;
  let answered = 0;
  const failures: string[] = [];
  const done = (async () => {
    while (!stopped) {
      const t0 = performance.now();
      try {
        const res = await fetch(`${base}/healthz`, { signal: AbortSignal.timeout(30_000) });
        if (res.status !== 200) failures.push(`status ${res.status}`);
        await res.text();
        answered++;
      } catch (e) {
        failures.push((e as Error).message);
      }
      slowest = Math.max(slowest, performance.now() - t0);
      await new Promise((r) => setTimeout(r, everyMs));
    }
  })();
  return {
    async stop() {
      stopped = true;
      await done;
      return { slowest, answered, failures };
    },
  };
}
