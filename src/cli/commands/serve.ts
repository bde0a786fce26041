/** `wearshift serve`: queue workers and the HTTP API in one process. */
import type { Command } from 'commander';
import { WORKER_DEFAULTS } from '../../queue/workers.ts';
import { defaultHistoryThreads, runService, type ServiceCommandOptions } from '../../runtime/runService.ts';

export function registerServe(program: Command): void {
  program
    .command('serve')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--port <n>', 'HTTP port (default: PORT, else 8080)')
    .option('--opcua-port <n>', 'also serve OPC UA Alarms & Conditions on this opc.tcp port (default: opcua.port of the configuration, else off)')
    .option('--history-threads <n>', 'threads for the evaluations a history import (`import --history`) hands off (a component whose month brings a revision of a result already judged, or an earlier result), each with its own Redis connection, started at the first and ended a minute after the last; 0: the main thread does; by default the number of cores, at most 4 (0 on one core)', String(defaultHistoryThreads()))
    .option('--results-at-once <n>', 'results jobs this process takes at once per partition; each is stored at once and their evaluations judged together in batches, one commit per component and batch: more make bigger batches under a backlog, fewer spread a burst over more worker processes', String(WORKER_DEFAULTS.resultsConcurrency))
    .option('--shutdown-timeout <seconds>', 'longest wait for active jobs and connections at shutdown', '10')
    .action((opts: ServiceCommandOptions) => runService('serve', opts));
}
