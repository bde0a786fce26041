/** `wearshift serve`: queue workers and the HTTP API in one process. */
import type { Command } from 'commander';
import { defaultHistoryThreads, runService, type ServiceCommandOptions } from '../../runtime/runService.ts';

export function registerServe(program: Command): void {
  program
    .command('serve')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--port <n>', 'HTTP port (default: PORT, else 8080)')
    .option('--opcua-port <n>', 'also serve OPC UA Alarms & Conditions on this opc.tcp port (default: opcua.port of the configuration, else off)')
    .option('--history-threads <n>', 'threads that evaluate the components of a history import (`import --history`), each with its own Redis connection, started when a history job comes and ended a minute after; 0: the main thread does; by default the number of cores, at most 4 (0 on one core)', String(defaultHistoryThreads()))
    .option('--shutdown-timeout <seconds>', 'longest wait for active jobs and connections at shutdown', '10')
    .action((opts: ServiceCommandOptions) => runService('serve', opts));
}
