/** Reads a YAML configuration file; errors name the file, the path inside it and the reason. */
import { readFileSync } from 'node:fs';
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

export function loadConfig(file: string | undefined): Config {
  if (file === undefined) return parseConfig('');
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (e) {
    throw new InputError(`${file}: cannot read the configuration: ${(e as Error).message}`);
  }
  return parseConfig(text, file);
}
