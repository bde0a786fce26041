/** Waits until the given BullMQ queues hold no waiting, delayed or active jobs, twice in a row. */
import type { Queue } from 'bullmq';

export async function drained(queues: readonly Queue[], timeoutMs = 60_000): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  let quietRounds = 0;
  while (quietRounds < 2) {
    if (Date.now() > deadline) throw new Error(`queues not drained within ${timeoutMs} ms`);
    await new Promise((r) => setTimeout(r, 100));
    const counts = await Promise.all(queues.map((q) => q.getJobCounts('waiting', 'active', 'delayed', 'prioritized', 'waiting-children')));
    const busy = counts.some((c) => Object.values(c).some((n) => n > 0));
    quietRounds = busy ? 0 : quietRounds + 1;
  }
}
