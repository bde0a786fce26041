import type { Iso4406Code } from '../../domain/reading.ts';

/** The scale numbers an ISO 4406 code gives, without the size ranges the lab left out. */
export function codeNumbers(code: Iso4406Code): number[] {
  return [code.p4, code.p6, code.p14].filter((n): n is number => n !== null);
}
