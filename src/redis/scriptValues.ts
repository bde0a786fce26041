/**
 * The stored values of a script call (checkpoints, findings log records, the incident state and records, in their
 * compact form, compactText.ts): each goes as an argument of its own, bytes as they are, and the payload names it by
 * its argument number (scripts.ts, `stored`).
 */
export class ScriptValues {
  readonly values: Array<string | Buffer> = [];
  constructor(private readonly first: number) {}
  /** The argument number of `value`, added after those before it. */
  add(value: string | Buffer): number {
    return this.values.push(value) + this.first - 1;
  }
}
