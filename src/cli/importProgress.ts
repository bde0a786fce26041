/**
 * The progress bar of `import` and `import --map`: bytes of the file read, samples accepted and rejected, drawn on
 * stderr when it is a terminal (never with --json). Lines logged meanwhile (the rejected records) go above it.
 */
import { MultiBar, Presets } from 'cli-progress';

export interface ImportCountsSoFar {
  readonly accepted: number;
  readonly rejected: number;
}

export interface ImportProgress {
  /** Writes a line above the bar. */
  log(text: string): void;
  update(bytes: number, counts: ImportCountsSoFar): void;
  /** Draws the final state; lines logged since the last frame are written before it, none is lost. */
  stop(bytes: number, counts: ImportCountsSoFar): void;
}

/** The bar for a file of `size` bytes, or undefined when stderr is no terminal or the output is JSON. */
export function importProgress(size: number, json: boolean | undefined): ImportProgress | undefined {
  if (!process.stderr.isTTY || json === true) return undefined;
  const bar = new MultiBar({ format: ' {bar} {percentage}% | {value}/{total} bytes | {accepted} accepted, {rejected} rejected', hideCursor: true, stream: process.stderr }, Presets.shades_classic);
  const progress = bar.create(size, 0, { accepted: 0, rejected: 0 });
  return {
    log: (text) => bar.log(`${text}\n`),
    update: (bytes, c) => progress.update(bytes, { accepted: c.accepted, rejected: c.rejected }),
    stop(bytes, c) {
      progress.update(bytes, { accepted: c.accepted, rejected: c.rejected });
      // cli-progress writes logged lines only when it draws a frame (ten a second), and not on stop: draw one first.
      bar.update();
      bar.stop();
    },
  };
}
