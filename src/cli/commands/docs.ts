/** `wearshift docs`: regenerates the README's configuration and lab mapping references and the published JSON Schemas. */
import { readFileSync, writeFileSync } from 'node:fs';
import type { Command } from 'commander';
import { withConfigReference } from '../../domain/configReference.ts';
import { InputError } from '../../domain/errors.ts';
import { withMappingReference } from '../../intake/labFiles/mappingReference.ts';
import { writeSchemas } from './schema.ts';

export function registerDocs(program: Command): void {
  program
    .command('docs')
    .option('--readme <file>', 'README to update (it must hold the reference markers)', 'README.md')
    .option('--schemas <dir>', 'directory for the JSON Schemas', 'schemas')
    .action((opts: { readme: string; schemas: string }) => {
      // A file that cannot be read or written, or that lacks the markers, is the user's to fix: one line, exit 2.
      let text;
      try {
        text = readFileSync(opts.readme, 'utf8');
      } catch (e) {
        throw new InputError(`${opts.readme}: cannot read it: ${(e as Error).message}`);
      }
      let updated;
      try {
        updated = withMappingReference(withConfigReference(text));
      } catch (e) {
        throw new InputError(`${opts.readme}: ${(e as Error).message}`);
      }
      try {
        writeFileSync(opts.readme, updated);
      } catch (e) {
        throw new InputError(`${opts.readme}: cannot write it: ${(e as Error).message}`);
      }
      process.stdout.write(`${opts.readme}\n`);
      writeSchemas(opts.schemas);
    });
}
