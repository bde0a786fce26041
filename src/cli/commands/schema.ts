/** `wearshift schema`: writes the JSON Schemas of the result event, the configuration and the lab mapping, the OpenAPI document of the HTTP API and the AsyncAPI document of the webhook and MQTT events, for integrators. */
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import type { Command } from 'commander';
import { z } from 'zod';
import { ConfigSchema } from '../../domain/config.ts';
import { ResultEventSchema } from '../../domain/event.ts';
import { LabMappingSchema } from '../../intake/labFiles/mappingSchema.ts';
import { asyncApiDocument } from '../../contracts/asyncapi.ts';
import { openApiDocument } from '../../contracts/openapi.ts';
import { InputError } from '../../domain/errors.ts';

export function publishedSchemas(): Record<string, unknown> {
  return {
    'result-event.schema.json': {
      $id: 'https://wearshift.invalid/schemas/result-event.schema.json',
      title: 'wearshift result event',
      ...z.toJSONSchema(ResultEventSchema, { io: 'input' }),
    },
    'config.schema.json': {
      $id: 'https://wearshift.invalid/schemas/config.schema.json',
      title: 'wearshift configuration',
      ...z.toJSONSchema(ConfigSchema, { io: 'input', unrepresentable: 'any' }),
    },
    'lab-mapping.schema.json': {
      $id: 'https://wearshift.invalid/schemas/lab-mapping.schema.json',
      title: 'wearshift lab mapping',
      ...z.toJSONSchema(LabMappingSchema, { io: 'input', unrepresentable: 'any' }),
    },
    'openapi.json': openApiDocument(),
    'asyncapi.json': asyncApiDocument(),
  };
}

export function registerSchema(program: Command): void {
  program
    .command('schema')
    .option('--out <dir>', 'directory to write into', 'schemas')
    .action((opts: { out: string }) => writeSchemas(opts.out));
}

export function schemaFileText(schema: unknown): string {
  return `${JSON.stringify(schema, null, 2)}\n`;
}

export function writeSchemas(dir: string): void {
  for (const [name, schema] of Object.entries(publishedSchemas())) {
    try {
      mkdirSync(dir, { recursive: true });
      writeFileSync(join(dir, name), schemaFileText(schema));
    } catch (e) {
      // A directory that cannot be written is the user's to fix: one line, exit 2.
      throw new InputError(`${join(dir, name)}: cannot write it: ${(e as Error).message}`);
    }
    process.stdout.write(`${join(dir, name)}\n`);
  }
}
