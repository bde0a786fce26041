/** Parses a YAML configuration; errors name the source, the path inside it and the reason. Reading the file is the shell's (src/runtime/loadConfig.ts). */
import { parse } from 'yaml';
import { ConfigSchema, type Config } from './config.ts';
import { InputError } from './errors.ts';

export function parseConfig(text: string, source = 'configuration'): Config {
  let doc: unknown;
  try {
    doc = parse(text) ?? {};
  } catch (e) {
    throw new InputError(`${source}: not valid YAML: ${(e as Error).message}`);
  }
  const parsed = ConfigSchema.safeParse(doc);
  if (!parsed.success) {
    const lines = parsed.error.issues.map((i) => `  ${i.path.join('.') || '(top level)'}: ${i.message}`);
    throw new InputError(`${source}: invalid configuration\n${lines.join('\n')}`);
  }
  return parsed.data;
}
