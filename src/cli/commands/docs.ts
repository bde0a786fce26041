/** `wearshift docs`: regenerates the README's configuration and lab mapping references and the published JSON Schemas. */
import { readFileSync, writeFileSync } from 'node:fs';
import type { Command } from 'commander';
import { withConfigReference } from '../../domain/configReference.ts';
import { withMappingReference } from '../../intake/labFiles/mappingReference.ts';
import { writeSchemas } from './schema.ts';

export function registerDocs(program: Command): void {
  program
    .command('docs')
    .option('--readme <file>', 'README to update', 'README.md')
    .option('--schemas <dir>', 'directory for the JSON Schemas', 'schemas')
    .action((opts: { readme: string; schemas: string }) => {
      writeFileSync(opts.readme, withMappingReference(withConfigReference(readFileSync(opts.readme, 'utf8'))));
      process.stdout.write(`${opts.readme}\n`);
      writeSchemas(opts.schemas);
    });
}
