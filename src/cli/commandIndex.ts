/**
 * Every command of the `wearshift` command line: its name, its one-line summary, the group it is listed under and
 * how its module is loaded. Only the command that runs is loaded (`wearshift --help` loads none), so that a command
 * pays for its own dependencies only and the help answers at once.
 */
import type { Command } from 'commander';

export interface CommandEntry {
  readonly name: string;
  /** The line under the command's name in `wearshift --help`, and the head of `wearshift <name> --help`. */
  readonly summary: string;
  /** What follows the name in the list of commands: `[options]`, arguments. */
  readonly usage: string;
  readonly group: string;
  /** Loads the command's module and adds the command, with its options and subcommands, to the program. */
  readonly register: (program: Command) => Promise<void>;
}

export const COMMANDS: readonly CommandEntry[] = [
  { name: 'demo', group: 'Try it and run it:', usage: '[options]', summary: 'play the invented demo fleet through workers, API, e-mail and webhooks; print when each rule caught each fault', register: async (p) => (await import('./commands/demo.ts')).registerDemo(p) },
  { name: 'serve', group: 'Try it and run it:', usage: '[options]', summary: 'run the queue workers and the HTTP API in one process (graceful shutdown on SIGTERM/SIGINT)', register: async (p) => (await import('./commands/serve.ts')).registerServe(p) },
  { name: 'worker', group: 'Try it and run it:', usage: '[options]', summary: 'run the queue workers only (results, history, evaluate, notify, escalate); several may share one Redis or Redis Cluster (REDIS_CLUSTER_NODES)', register: async (p) => (await import('./commands/worker.ts')).registerWorker(p) },
  { name: 'api', group: 'Try it and run it:', usage: '[options]', summary: 'run the HTTP API only; results are queued for workers started with `wearshift worker`', register: async (p) => (await import('./commands/api.ts')).registerApi(p) },
  { name: 'import', group: 'Results and incidents:', usage: '[options] <file>', summary: 'validate a CSV or JSONL file of lab results and enqueue the valid ones, with a per-line error report', register: async (p) => (await import('./commands/import.ts')).registerImport(p) },
  { name: 'incidents', group: 'Results and incidents:', usage: '', summary: 'list, show, acknowledge, shelve and resolve incidents', register: async (p) => (await import('./commands/incidents.ts')).registerIncidents(p) },
  { name: 'replay', group: 'Results and incidents:', usage: '[options] <file>', summary: 'run intake, evaluation and incidents in-process on a CSV or JSONL history (no Redis); print findings and incident changes in time order, then the open incidents with their time-to-limit forecasts', register: async (p) => (await import('./commands/replay.ts')).registerReplay(p) },
  { name: 'sample-verdicts', group: 'Results and incidents:', usage: '', summary: "responders' words on samples: list those the live store holds as JSON lines (the file replay and backtest take with --sample-verdicts), or give one from the terminal as the API takes it", register: async (p) => (await import('./commands/sampleVerdicts.ts')).registerSampleVerdicts(p) },
  { name: 'failed', group: 'Results and incidents:', usage: '', summary: 'failed jobs: list them with their reasons, retry them after a fix; webhook endpoints a 410 Gone disabled, and enabling them again', register: async (p) => (await import('./commands/failed.ts')).registerFailed(p) },
  { name: 'design', group: 'Tuning and checking the detectors:', usage: '', summary: 'average run lengths of EWMA or CUSUM parameters, or the h / L that meets a target in-control run length; the noise a configuration gives', register: async (p) => (await import('./commands/design.ts')).registerDesign(p) },
  { name: 'backtest', group: 'Tuning and checking the detectors:', usage: '[options] <file>', summary: 'replay a history in-process (no Redis) and report what each rule family would have caught, and how early, as one HTML file', register: async (p) => (await import('./commands/backtest.ts')).registerBacktest(p) },
  { name: 'chart', group: 'Tuning and checking the detectors:', usage: '', summary: 'run one detector (EWMA or CUSUM) over a plain series of numbers from stdin; parameters in sigma units', register: async (p) => (await import('./commands/chart.ts')).registerChart(p) },
  { name: 'schema', group: 'For developers of wearshift:', usage: '[options]', summary: 'write the JSON Schemas of the result event, the configuration and the lab mapping, and the OpenAPI and AsyncAPI documents', register: async (p) => (await import('./commands/schema.ts')).registerSchema(p) },
  { name: 'docs', group: 'For developers of wearshift:', usage: '[options]', summary: 'rewrite the configuration and lab mapping references in README.md and the JSON Schemas in schemas/ from the code', register: async (p) => (await import('./commands/docs.ts')).registerDocs(p) },
];
