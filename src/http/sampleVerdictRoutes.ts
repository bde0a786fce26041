/**
 * A responder's word on a sample that a sampling finding put in doubt, or at which a change detector signals a rise
 * (fastify 5 plugin): `POST /v1/units/:unit/components/:component/samples/:sampleId/verdict` with
 * `{"verdict": "confirmed" | "rejected" | "usual-rate" | "withdrawn", "by": "…"}`.
 *
 * - `confirmed`: the sample is genuine; it goes back into the trend, the baselines and the group statistics.
 * - `rejected`: the sample is wrong (new oil sent by mistake, another unit's bottle); it stays out for good.
 * - `usual-rate`: the wear rate EWMA or CUSUM signal as a rise at the sample is this component's usual one (its
 *   baseline was learnt low); the detectors of each measurand signalling a rise there learn a new baseline from it on.
 * - `withdrawn`: takes an earlier word back; the sample is judged again without it.
 *
 * The component is evaluated again from that sample on, and who gave the word shows in the timeline of every incident
 * that holds the sample. Answers 202 with the verdict taken, 404 when the component
 * holds no such sample, 409 when nothing questioned the sample (confirmed or rejected: only a sample in doubt
 * takes those) or no detector signals a rise at it (usual-rate), 400 naming the field and reason for a bad body.
 */
import type { FastifyPluginAsync } from 'fastify';
import { z } from 'zod';
import type { SampleMark } from '../analysis/model.ts';
import type { ComponentRef } from '../pipeline/ports.ts';
import { requireRole, type AccessTokens } from './auth.ts';
import { ActorNameSchema } from '../domain/actorName.ts';
import { refusalText } from '../pipeline/wordRefusal.ts';

/**
 * What the route needs: stores the mark, records who gave it (`by`) in the timelines of the incidents concerned and
 * has the component evaluated again (`taken`), or says that the component holds no such sample (`unknown`) or that
 * nothing questioned it (`not-in-doubt`: only a sample a sampling finding put in doubt takes a word; taking a word back
 * always does).
 */
export interface SampleVerdictTaker {
  mark(ref: ComponentRef, sampleId: string, mark: SampleMark | null, by: string): Promise<'taken' | 'unknown' | 'not-in-doubt' | 'no-rise'>;
}

export interface SampleVerdictRoutesOptions {
  /** The API's bearer tokens. */
  readonly tokens: AccessTokens;
  readonly verdicts: SampleVerdictTaker;
}

export const VerdictBodySchema = z
  .object({
    verdict: z
      .enum(['confirmed', 'rejected', 'usual-rate', 'withdrawn'])
      .describe(
        'confirmed: genuine, back into the trend; rejected: kept out for good; usual-rate: the rate EWMA or CUSUM signal as a rise at the sample is the component\u2019s usual one, its change detectors learn a new baseline from there; withdrawn: an earlier word taken back.',
      ),
    by: ActorNameSchema.describe('Who gives the verdict.'),
  })
  .strict();

interface Params {
  unit: string;
  component: string;
  sampleId: string;
}

export const sampleVerdictRoutes: FastifyPluginAsync<SampleVerdictRoutesOptions> = async (app, options) => {
  app.post<{ Params: Params }>(
    '/v1/units/:unit/components/:component/samples/:sampleId/verdict',
    { onRequest: requireRole(options.tokens, 'responder') },
    async (request, reply) => {
      const body = VerdictBodySchema.safeParse(request.body);
      if (!body.success) {
        const issues = body.error.issues.map((i) => ({ field: ['body', ...i.path].join('.'), message: i.message }));
        return reply.code(400).send({ error: 'invalid-request', message: issues.map((i) => `${i.field}: ${i.message}`).join('; '), issues });
      }
      const { unit, component, sampleId } = request.params;
      const mark: SampleMark | null = body.data.verdict === 'withdrawn' ? null : body.data.verdict;
      const outcome = await options.verdicts.mark({ unit, component }, sampleId, mark, body.data.by);
      if (outcome === 'unknown') return reply.code(404).send({ error: 'not-found', message: `component "${component}" of unit "${unit}" holds no sample "${sampleId}"` });
      if (outcome === 'no-rise' || outcome === 'not-in-doubt') return reply.code(409).send({ error: outcome, message: refusalText(outcome, `sample "${sampleId}" of ${unit}/${component}`) });
      request.log.info({ unit, component, sampleId, verdict: body.data.verdict, by: body.data.by }, 'sample verdict taken');
      return reply.code(202).send({ unit, component, sampleId, verdict: body.data.verdict, by: body.data.by });
    },
  );
};
