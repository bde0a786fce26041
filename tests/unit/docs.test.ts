/** The README's configuration reference and the published JSON Schemas must say what the code does. */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { publishedSchemas, schemaFileText } from '../../src/cli/commands/schema.ts';
import { withConfigReference } from '../../src/domain/configReference.ts';

describe('documentation kept in step with the schemas', () => {
  it('README configuration reference equals the one generated from the zod schema (run `npm run docs` after a schema change)', () => {
    const readme = readFileSync('README.md', 'utf8');
    expect(withConfigReference(readme)).toBe(readme);
  });

  it.each(Object.entries(publishedSchemas()))('schemas/%s equals the schema generated from the code', (name, schema) => {
    expect(readFileSync(`schemas/${name}`, 'utf8')).toBe(schemaFileText(schema));
  });
});
