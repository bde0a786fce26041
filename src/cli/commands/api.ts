/** `wearshift api`: the HTTP API only (intake, incidents, series, probes, metrics); workers run elsewhere. */
import type { Command } from 'commander';
import { runService, type ServiceCommandOptions } from '../../runtime/runService.ts';

export function registerApi(program: Command): void {
  program
    .command('api')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--port <n>', 'HTTP port (default: PORT, else 8080)')
    .option('--opcua-port <n>', 'also serve OPC UA Alarms & Conditions on this opc.tcp port (default: opcua.port of the configuration, else off)')
    .option('--shutdown-timeout <seconds>', 'longest wait for open requests and connections at shutdown', '10')
    .action((opts: ServiceCommandOptions) => runService('api', opts));
}
