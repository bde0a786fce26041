/** Reads a lab mapping file (YAML); errors name the file, the path inside it and the reason. */
import { readFileSync } from 'node:fs';
import { parse } from 'yaml';
import { InputError } from '../../domain/errors.ts';
import { LabMappingSchema, type LabMapping } from './mappingSchema.ts';

export function parseLabMapping(text: string, source = 'mapping'): LabMapping {
  let doc: unknown;
  try {
    doc = parse(text) ?? {};
  } catch (e) {
    throw new InputError(`${source}: not valid YAML: ${(e as Error).message}`);
  }
  const parsed = LabMappingSchema.safeParse(doc);
  if (!parsed.success) {
    const lines = parsed.error.issues.map((i) => `  ${i.path.join('.') || '(top level)'}: ${i.message}`);
    throw new InputError(`${source}: invalid lab mapping\n${lines.join('\n')}`);
  }
  return parsed.data;
}

export function loadLabMapping(file: string): LabMapping {
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (e) {
    throw new InputError(`${file}: cannot read the lab mapping: ${(e as Error).message}`);
  }
  return parseLabMapping(text, file);
}
