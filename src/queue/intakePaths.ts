/**
 * The ways results come in (`wearshift_results_accepted_total{path}`): the HTTP API, `wearshift import`, and the
 * producer of integrators' own code. The API counts what it accepts as it answers; the command line and integrators'
 * processes serve no /metrics, so their jobs carry their way in, in the job's name (`result:import`,
 * `history:producer`), and the worker that takes such a job counts its records. A job put on a queue by other means
 * (a name without a way in, as BullMQ's own `add` gives it) is counted as `queue`.
 */
import type { Job } from 'bullmq';
import type { Metrics } from '../telemetry/metrics.ts';

export const INTAKE_PATHS = ['http', 'import', 'producer'] as const;
export type IntakePath = (typeof INTAKE_PATHS)[number];

/** The name of a `results` or `history` job enqueued by `path`. */
export function intakeJobName(kind: 'result' | 'history', path: IntakePath): string {
  return `${kind}:${path}`;
}

/** The way in a job's name says, or `queue` when it says none. */
export function intakePathOf(jobName: string): IntakePath | 'queue' {
  const path = jobName.slice(jobName.indexOf(':') + 1);
  return jobName.includes(':') && (INTAKE_PATHS as readonly string[]).includes(path) ? (path as IntakePath) : 'queue';
}

/**
 * Counts the records of a job the worker's validation accepted, by the job's way in: once per job (on its first
 * start, so that a retry or a stalled job taken over counts nothing more), and not for HTTP, whose records the API
 * counted when it accepted them.
 */
export function countAccepted(metrics: Metrics | undefined, job: Pick<Job, 'name' | 'attemptsStarted'>, records: number): void {
  const path = intakePathOf(job.name);
  if (metrics === undefined || path === 'http' || records === 0 || job.attemptsStarted > 1) return;
  metrics.accepted(path, records);
}
