/**
 * Prometheus metrics of one process (prom-client). Workers count what they store and evaluate, and the results of
 * `wearshift import` and of integrators' producers as they take their jobs (those processes serve no /metrics); the
 * HTTP intake what it accepts and rejects. Queue depth is read from Redis when the metrics are scraped.
 */
import { Counter, Gauge, Histogram, Registry, collectDefaultMetrics } from 'prom-client';
import type { FieldIssue } from '../domain/event.ts';
import type { Finding } from '../domain/finding.ts';
import { FUTURE_REASON } from '../domain/event.ts';
import { ADVISORY_CAUTION } from '../domain/caution.ts';

/** Reads the job counts of the queues; wired by whoever owns the queues. */
export type QueueDepthSource = () => Promise<Record<string, Record<string, number>>>;

export interface Metrics {
  readonly registry: Registry;
  /**
   * Records accepted, by `path`: `http` counted by the API as it accepts them; `import`, `producer` and `queue` (a job
   * put on the queue by other means) by the worker whose validation accepts the job's records, once per job.
   */
  accepted(path: string, count?: number): void;
  /** A record rejected at intake or by the results worker; the reason is coarse so that the label set stays small. */
  rejected(path: string, issues: readonly FieldIssue[]): void;
  stored(status: string): void;
  evaluated(seconds: number, outcome: string): void;
  /** A batch of live results judged together (queue/resultBatches.ts): its components and results. */
  batched(components: number, results: number): void;
  /** An evaluate job that left stored results due for earlier results not judged yet, and comes back (queue/arrivalLimit.ts). */
  held(): void;
  findings(findings: readonly Finding[]): void;
  /** Sets where queue depth comes from; read at every scrape. */
  watchQueues(source: QueueDepthSource): void;
}

export function createMetrics(options: { defaultMetrics?: boolean } = {}): Metrics {
  const registry = new Registry();
  if (options.defaultMetrics ?? true) collectDefaultMetrics({ register: registry, prefix: 'wearshift_' });
  const accepted = new Counter({ name: 'wearshift_results_accepted_total', help: 'Result records accepted, by the way they came in (path): http counted by the API as it accepts them; import, producer and queue (a job added by other means) by the worker that takes their job, once per job.', labelNames: ['path'], registers: [registry] });
  const rejected = new Counter({
    name: 'wearshift_results_rejected_total',
    help: 'Result records rejected, by intake path, reason (schema, reading, future) and top-level field.',
    labelNames: ['path', 'reason', 'field'],
    registers: [registry],
  });
  const stored = new Counter({ name: 'wearshift_results_stored_total', help: 'Results stored by the results worker, by outcome (new, replacement, duplicate, conflict, superseded).', labelNames: ['status'], registers: [registry] });
  const evaluation = new Histogram({
    name: 'wearshift_evaluation_duration_seconds',
    help: 'Time to evaluate one component (load, evaluate, feed incidents, commit), by outcome.',
    labelNames: ['outcome'],
    buckets: [0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10],
    registers: [registry],
  });
  const batchResults = new Histogram({
    name: 'wearshift_result_batch_results',
    help: 'Live results judged together in one batch (one commit per component and batch): 1 when the feed keeps pace, more under a backlog.',
    buckets: [1, 2, 5, 10, 25, 50, 100, 250, 500, 1000, 5000],
    registers: [registry],
  });
  const batchComponents = new Histogram({
    name: 'wearshift_result_batch_components',
    help: 'Components judged in one batch of live results.',
    buckets: [1, 2, 5, 10, 25, 50, 100, 250, 500, 1000, 5000],
    registers: [registry],
  });
  const held = new Counter({
    name: 'wearshift_evaluations_held_total',
    help: 'Evaluate jobs (a component another worker held, a group\'s cascade, a responder\'s word) that judged a component only up to results not judged yet in arrival order and come back later, once per try; one that keeps rising for minutes points at a worker that holds results without judging them.',
    registers: [registry],
  });
  const findings = new Counter({ name: 'wearshift_findings_total', help: `Findings on newly evaluated samples, by rule family and severity. ${ADVISORY_CAUTION}`, labelNames: ['rule', 'severity'], registers: [registry] });
  let source: QueueDepthSource | undefined;
  new Gauge({
    name: 'wearshift_queue_jobs',
    help: 'Jobs per queue and state, read from Redis at scrape time.',
    labelNames: ['queue', 'state'],
    registers: [registry],
    async collect() {
      if (source === undefined) return;
      this.reset();
      const counts = await source().catch(() => undefined);
      for (const [queue, states] of Object.entries(counts ?? {})) for (const [state, n] of Object.entries(states)) this.set({ queue, state }, n);
    },
  });
  return {
    registry,
    accepted: (path, count = 1) => accepted.inc({ path }, count),
    rejected: (path, issues) => {
      const first = issues[0];
      const field = first === undefined || first.path === '' ? '(record)' : first.path.split('.')[0]!;
      const reason = first?.reason.startsWith(FUTURE_REASON) ? 'future' : field === 'readings' ? 'reading' : 'schema';
      rejected.inc({ path, reason, field: reason === 'reading' ? 'readings' : field });
    },
    stored: (status) => stored.inc({ status }),
    evaluated: (seconds, outcome) => evaluation.observe({ outcome }, seconds),
    batched: (components, results) => {
      batchComponents.observe(components);
      batchResults.observe(results);
    },
    held: () => held.inc(),
    findings: (list) => {
      for (const f of list) findings.inc({ rule: f.rule, severity: f.severity });
    },
    watchQueues: (s) => {
      source = s;
    },
  };
}
