/**
 * The layer rule (eslint/layers.js) that `npm run lint` runs in CI: an import back up the data's path fails, one
 * down the layers passes, and the map of layers is free of cycles.
 */
import { ESLint } from 'eslint';
import { describe, expect, it } from 'vitest';
import { LAYERS } from '../../eslint/layers.js';

const eslint = new ESLint({ cwd: new URL('../..', import.meta.url).pathname });

async function layerMessages(filePath: string, code: string): Promise<string[]> {
  const [result] = await eslint.lintText(code, { filePath });
  return result!.messages.filter((m) => m.ruleId === 'layers/allowed-imports').map((m) => m.message);
}

describe('layer rule', () => {
  it('refuses an import that runs back up: the analysis core importing the queue, redis importing http', async () => {
    expect(await layerMessages('src/analysis/example.ts', "import { QUEUE_NAMES } from '../queue/queues.ts';\nexport const x = QUEUE_NAMES;\n")).toEqual([
      expect.stringContaining('src/analysis/ may not import from src/queue/'),
    ]);
    expect(await layerMessages('src/redis/example.ts', "export { buildServer } from '../http/server.ts';\n")).toEqual([expect.stringContaining('src/redis/ may not import from src/http/')]);
    expect(await layerMessages('bench/example.ts', "export { drained } from '../tests/helpers/queueDrain.ts';\n")).toEqual([expect.stringContaining('bench/ must not import from tests/')]);
  });

  it('lets the layers import downwards and within their own folder', async () => {
    expect(await layerMessages('src/queue/example.ts', "export { evaluateComponent } from '../analysis/evaluate.ts';\nexport { QUEUE_NAMES } from './queues.ts';\n")).toEqual([]);
    expect(await layerMessages('src/cli/example.ts', "export { buildServer } from '../http/server.ts';\n")).toEqual([]);
  });

  it('names a folder that is not in the map', async () => {
    expect(await layerMessages('src/newfolder/example.ts', "export { tidy } from '../domain/numbers.ts';\n")).toEqual([expect.stringContaining('src/newfolder/ is not in eslint/layers.js')]);
  });

  it('keeps the map acyclic: no layer reaches itself through the folders it may import', () => {
    const reaches = (from: string, seen = new Set<string>()): Set<string> => {
      for (const next of (LAYERS as Record<string, string[]>)[from] ?? []) if (!seen.has(next)) reaches(next, seen.add(next));
      return seen;
    };
    for (const name of Object.keys(LAYERS)) expect(reaches(name).has(name)).toBe(false);
  });
});
