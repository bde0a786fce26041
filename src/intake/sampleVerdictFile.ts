/**
 * A file of responders' words on samples, for `wearshift replay` and `wearshift backtest` (`--sample-verdicts`): JSON
 * lines, one word each, as `wearshift sample-verdicts` writes the words a live store holds:
 *
 *   {"unit":"GEN-1","component":"engine","sampleId":"G1-27","verdict":"usual-rate","after":"G1-29","by":"reliability engineer","at":"2026-06-01T09:00:00Z"}
 *
 * `verdict` is `confirmed` or `rejected` (of a sample in doubt) or `usual-rate` (of a sample at which EWMA or CUSUM
 * signal a rise). `after` (optional): the component's latest sample when the word was given; replay gives the word
 * once the history has brought that sample (else once it has brought the word's own). `by` (who gave it, one line of
 * at most 80 characters) and `at` (when, ISO 8601 with a time zone) are optional and only go into the incidents'
 * timelines. Blank lines are skipped. Every line is checked before any is
 * used: a bad one is an error naming the file, the line, the field and the reason, and nothing is replayed.
 */
import { readFileSync, statSync } from 'node:fs';
import { z } from 'zod';
import { ActorNameSchema } from '../domain/actorName.ts';
import { InputError } from '../domain/errors.ts';

const WordSchema = z
  .object({
    unit: z.string().trim().min(1, 'required'),
    component: z.string().trim().min(1, 'required'),
    sampleId: z.string().trim().min(1, 'required'),
    verdict: z.enum(['confirmed', 'rejected', 'usual-rate'], { message: 'expected confirmed, rejected or usual-rate' }),
    by: ActorNameSchema.optional(),
    after: z.string().trim().min(1, 'required when given').optional(),
    at: z.iso.datetime({ offset: true, message: 'expected an ISO 8601 date-time with a time zone, such as 2026-03-01T18:00:00Z' }).optional(),
  })
  .strict();

/** One word of the file, with the line it stands on. */
export type SampleVerdictLine = z.infer<typeof WordSchema> & { readonly line: number };

/** At most this many lines are read (a file of words is small: one per sample a responder judged). */
export const MAX_WORD_LINES = 100_000;
/** At most this many bytes: 100 000 words of about 300 bytes. */
export const MAX_WORD_FILE_BYTES = 32 * 1024 * 1024;

export function readSampleVerdictFile(path: string): SampleVerdictLine[] {
  let text: string;
  try {
    const size = statSync(path).size;
    if (size > MAX_WORD_FILE_BYTES) throw new InputError(`${path}: ${size} bytes, more than the ${MAX_WORD_FILE_BYTES} a file of words may hold`);
    text = readFileSync(path, 'utf8');
  } catch (e) {
    if (e instanceof InputError) throw e;
    throw new InputError(`${path}: ${(e as Error).message}`);
  }
  const lines = text.replace(/^\uFEFF/, '').split(/\r?\n/);
  if (lines.length > MAX_WORD_LINES) throw new InputError(`${path}: more than ${MAX_WORD_LINES} lines; a file of words holds one line per sample a responder judged`);
  const words: SampleVerdictLine[] = [];
  const errors: string[] = [];
  lines.forEach((raw, i) => {
    const line = i + 1;
    if (raw.trim() === '') return;
    let value: unknown;
    try {
      value = JSON.parse(raw);
    } catch {
      errors.push(`${path}:${line}: not a JSON object`);
      return;
    }
    const parsed = WordSchema.safeParse(value);
    if (parsed.success) words.push({ ...parsed.data, line });
    else for (const issue of parsed.error.issues) errors.push(`${path}:${line}: ${issue.path.length > 0 ? issue.path.join('.') : '(line)'}: ${issue.message}`);
  });
  if (errors.length > 0) throw new InputError(errors.slice(0, 20).join('\n') + (errors.length > 20 ? `\n… and ${errors.length - 20} more` : ''));
  return words;
}
