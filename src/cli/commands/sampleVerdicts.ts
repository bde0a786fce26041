/**
 * `wearshift sample-verdicts list|give`, straight against the live store:
 * - `list` (the default): the responders' words on samples that the store holds (confirmed, rejected, usual-rate), one
 *   JSON line each, in the order they were given: the file `wearshift replay` and `wearshift backtest` take with
 *   `--sample-verdicts`, so that they judge the same results with the same words as production. Who gave a word,
 *   when and after which sample are kept with the word; for a word stored before they were, they come from the
 *   component's action log, else the timelines of its incidents (its latest 1000 of the unit's); a word found in
 *   neither says neither.
 * - `give`: a responder's word from the terminal, as the API's `POST …/samples/:sampleId/verdict` takes it (the same
 *   SampleVerdicts, the same refusals): stored, written into the timelines of the incidents that hold the sample,
 *   announced on the live channel, and the component queued to be judged again by the workers.
 */
import type { Command } from 'commander';
import { incidentRules } from '../../incidents/policy.ts';
import type { Incident } from '../../incidents/model.ts';
import { IncidentFilterSchema, MAX_LIST_LIMIT } from '../../incidents/listFilter.ts';
import { RedisIncidents } from '../../redis/redisIncidents.ts';
import { RedisStore } from '../../redis/redisStore.ts';
import { writeJsonLine } from '../output.ts';
import { withRedis } from '../commandRedis.ts';
import { registerGive } from './sampleVerdictGive.ts';

interface SampleVerdictsOptions {
  config?: string;
}

export function registerSampleVerdicts(program: Command): void {
  const command = program.command('sample-verdicts');
  registerGive(command);
  command
    .command('list', { isDefault: true })
    .description("the words the live store holds, as JSON lines: the file replay and backtest take with --sample-verdicts (the default)")
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .addHelpText(
      'after',
      [
        '',
        'One JSON object per line, in the order the words were given (those whose time is unknown last):',
        '  {"unit","component","sampleId","verdict":"confirmed"|"rejected"|"usual-rate","after","by","at"}',
        'after: the component\'s latest judged sample when the word was given (replay gives the word there); by: who',
        'gave it; at: when. All three are kept with the word; for a word given before they were (5 December 2026) they are',
        'read from the incidents, and each is left out where the store no longer knows it.',
        'A word taken back is not listed. Save the output and give it to replay or backtest:',
        '  wearshift sample-verdicts > words.jsonl',
        '  wearshift replay history.csv --sample-verdicts words.jsonl',
      ].join('\n'),
    )
    .action((opts: SampleVerdictsOptions) =>
      withRedis(opts, async (redis, config) => {
        const store = new RedisStore(redis, { prefix: config.redis.prefix, partitions: config.redis.partitions, config });
        const incidents = new RedisIncidents(redis, { rules: incidentRules(config), prefix: config.redis.prefix, partitions: config.redis.partitions });
        const words = [];
        for (const entry of await store.components()) {
          const ref = { unit: entry.unit, component: entry.component };
          const marks = (await store.evaluationInput(ref))?.marks;
          if (marks === undefined || marks.size === 0) continue;
          // Kept with each mark since 5 December 2026; a word stored before is looked up in the incidents.
          const stored = await store.wordsGiven(ref);
          let state: Awaited<ReturnType<typeof incidents.component>> | undefined;
          const componentState = async () => (state ??= await incidents.component(ref));
          // Where a word is no longer in the action log (its latest 500 actions), who gave it and when are looked up in
          // the component's incidents: those its state holds and those on record (a word that closed one leaves it there).
          let held: Incident[] | undefined;
          const heldIncidents = async (): Promise<Incident[]> => {
            if (held !== undefined) return held;
            const listed = (await incidents.list(IncidentFilterSchema.parse({ state: 'all', unit: ref.unit, limit: MAX_LIST_LIMIT }))).filter((i) => i.component === ref.component);
            const onRecord = (await Promise.all(listed.map((i) => incidents.get(i.id)))).filter((i): i is Incident => i !== undefined);
            return (held = [...Object.values((await componentState()).incidents), ...onRecord]);
          };
          for (const [sampleId, verdict] of marks) {
            const kept = stored.get(sampleId);
            if (kept !== undefined) {
              words.push({ ...ref, sampleId, verdict, ...(kept.after !== undefined && { after: kept.after }), by: kept.by, at: kept.at });
              continue;
            }
            const logged = (await componentState()).actions.findLast((a) => a.action.kind === 'sample-verdict' && a.action.sampleId === sampleId && a.action.verdict === verdict);
            const given = logged !== undefined ? { by: logged.action.by!, at: logged.action.at } : lastWord(await heldIncidents(), sampleId, verdict);
            words.push({ ...ref, sampleId, verdict, ...(logged?.after != null && { after: logged.after.sampleId }), ...(given !== undefined && { by: given.by, at: given.at }) });
          }
        }
        // In the order given: a later word may depend on an earlier one (a usual rate said once a rise is signalled).
        const order = (w: { at?: string; unit: string; component: string; sampleId: string }) => [w.at === undefined ? 1 : 0, w.at ?? '', w.unit, w.component, w.sampleId].join('\u0000');
        for (const w of words.sort((a, b) => (order(a) < order(b) ? -1 : order(a) > order(b) ? 1 : 0))) writeJsonLine(w);
        process.stderr.write(`wearshift: ${words.length} sample verdicts\n`);
      }),
    );
}

/** The latest timeline entry that gave this word on the sample, in the component's incidents. */
function lastWord(incidents: readonly Incident[], sampleId: string, verdict: string): { by: string; at: string } | undefined {
  let found: { by: string; at: string } | undefined;
  for (const inc of incidents) {
    for (const e of inc.timeline) {
      if (e.kind === 'sample-verdict' && e.sampleId === sampleId && e.verdict === verdict && (found === undefined || e.at > found.at)) found = { by: e.by, at: e.at };
    }
  }
  return found;
}
