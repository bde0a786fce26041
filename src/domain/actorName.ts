/**
 * Who acts or gives a word (an acknowledgement, a note, a verdict on a sample), as the API, the command line and a
 * file of responders' words take it: one line of at most 80 characters. Control characters (ESC, CR, C1) and
 * bidirectional overrides would act on a terminal that prints the history, or make a line read differently from what
 * it holds: refused, naming the field.
 */
import { z } from 'zod';

// eslint-disable-next-line no-control-regex
const CONTROLS_IN_A_LINE = /[\u0000-\u001f\u007f-\u009f\u2028\u2029\u202a-\u202e\u2066-\u2069]/;

export const ActorNameSchema = z
  .string()
  .trim()
  .normalize('NFKC')
  .min(1, 'required')
  .max(80, 'at most 80 characters')
  .refine((s) => !CONTROLS_IN_A_LINE.test(s), 'must be one line without control characters')
  .describe('Who acts.');
