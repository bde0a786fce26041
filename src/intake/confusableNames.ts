/**
 * Names that can be mistaken for others (Unicode TR 39, "confusable" and "mixed-script" detection, in a small
 * form): a unit called "РS1" with a Cyrillic Р reads exactly like "PS1" in a mail subject but is another unit.
 * Such names are accepted — a fleet may well use Cyrillic or Greek names — but the record's outcome carries a
 * warning naming the field, so the sender can correct a typing or encoding accident.
 */
import type { FieldIssue, Sample } from '../domain/event.ts';

/** Cyrillic and Greek letters whose usual glyphs look like Latin letters (TR 39 confusables, common cases). */
const LOOKS_LATIN = new Set([...'АВЕЅІЈКМНОРСТХУаеорсхуѕіјԛԝҮүӀΑΒΕΖΗΙΚΜΝΟΡΤΥΧοκνρτυχ']);

const SCRIPTS: [string, RegExp][] = [
  ['Latin', /\p{Script=Latin}/u],
  ['Cyrillic', /\p{Script=Cyrillic}/u],
  ['Greek', /\p{Script=Greek}/u],
];

/** Why the name could be mistaken for another, or undefined. */
export function confusableReason(name: string): string | undefined {
  const letters = [...name].filter((c) => /\p{L}/u.test(c));
  const scripts = SCRIPTS.filter(([, re]) => letters.some((c) => re.test(c))).map(([s]) => s);
  const lookalikes = letters.filter((c) => LOOKS_LATIN.has(c));
  if (scripts.length > 1) {
    return `"${name}" mixes ${scripts.join(' and ')} letters${lookalikes.length > 0 ? ` (${lookalikes.map(describe).join(', ')} look${lookalikes.length === 1 ? 's' : ''} Latin)` : ''}; it may read exactly like another name`;
  }
  if (letters.length > 0 && lookalikes.length === letters.length) {
    return `"${name}" is written in ${scripts[0]} letters that all look Latin (${lookalikes.map(describe).join(', ')}); it may read exactly like another name`;
  }
  return undefined;
}

/** Warnings for the names of a sample that can be mistaken for others. */
export function confusableWarnings(sample: Pick<Sample, 'unit' | 'component'>): FieldIssue[] {
  return (['unit', 'component'] as const).flatMap((field) => {
    const reason = confusableReason(sample[field]);
    return reason === undefined ? [] : [{ path: field, reason }];
  });
}

function describe(c: string): string {
  return `${c} U+${c.codePointAt(0)!.toString(16).toUpperCase().padStart(4, '0')}`;
}
