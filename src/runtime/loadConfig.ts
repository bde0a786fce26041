/** Reads a YAML configuration file; errors name the file, the path inside it and the reason. */
import { readFileSync } from 'node:fs';
import type { Config } from '../domain/config.ts';
import { parseConfig } from '../domain/configFile.ts';
import { InputError } from '../domain/errors.ts';

/** The configuration in `file`, or the built-in defaults without one. */
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
