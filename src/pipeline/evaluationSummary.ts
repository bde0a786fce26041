/**
 * What a caller of an evaluation keeps of its result: everything but the folded steps' analysis details, of which
 * only the findings are kept. It is what an evaluation thread sends back (structured clone), so it stays small.
 */
import type { Finding } from '../domain/finding.ts';
import type { EvaluationResult } from './evaluateStored.ts';

type Evaluated = Extract<EvaluationResult, { kind: 'evaluated' }>;

export type EvaluationSummary =
  | Exclude<EvaluationResult, { kind: 'evaluated' }>
  | (Omit<Evaluated, 'steps'> & {
      /** The findings of the folded steps, in history order. */
      readonly findings: readonly Finding[];
    });

export function summarizeEvaluation(result: EvaluationResult): EvaluationSummary {
  if (result.kind !== 'evaluated') return result;
  const { steps, ...rest } = result;
  return { ...rest, findings: steps.flatMap((s) => s.findings) };
}
