/** `wearshift worker`: the queue workers only; run as many as the load needs, on any machines, against one Redis or one Redis Cluster. */
import type { Command } from 'commander';
import { WORKER_DEFAULTS } from '../../queue/workers.ts';
import { defaultHistoryThreads, runService, type ServiceCommandOptions } from '../../runtime/runService.ts';

export function registerWorker(program: Command): void {
  program
    .command('worker')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--metrics-port <n>', 'also serve /healthz, /readyz and /metrics on this port')
    .option('--history-threads <n>', 'threads for the evaluations a history import (`import --history`) hands off (a component whose month brings a revision of a result already judged, or an earlier result), each with its own Redis connection, started at the first and ended a minute after the last; 0: the main thread does; by default the number of cores, at most 4 (0 on one core)', String(defaultHistoryThreads()))
    .option('--results-at-once <n>', 'results jobs this process takes at once per partition; each is stored at once and their evaluations judged together in batches, one commit per component and batch: more make bigger batches under a backlog, fewer spread a burst over more worker processes', String(WORKER_DEFAULTS.resultsConcurrency))
    .option('--arrival-order', 'judge each partition\'s results in the order they arrived across worker processes (the default): a batch waits (at most 90 s) for earlier results of an earlier sampling month of the same group or of the same component that another process holds, and an evaluate job judges a component only up to its results not judged yet, so that several processes give the verdicts of one')
    .option('--no-arrival-order', 'judge each batch at once, without waiting for earlier results other worker processes hold (several processes may then open incidents on a burst that are withdrawn later)')
    .option('--shutdown-timeout <seconds>', 'longest wait for active jobs and connections at shutdown', '10')
    .action((opts: ServiceCommandOptions) => runService('worker', opts));
}
