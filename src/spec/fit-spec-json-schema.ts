import * as z from 'zod';
import { fitSpecSchema } from './fit-spec-schema.js';

/** How to refresh the committed copy; kept in the schema's `$comment`. */
const REGENERATE = 'ROWFOLD_WRITE_SPEC_SCHEMA=1 npx vitest run test/unit/spec-json-schema.test.ts';

/**
 * The JSON Schema (draft 2020-12) of a fit spec file, generated from
 * {@link fitSpecSchema} as seen by a writer of the file (`io: 'input'`: keys with
 * defaults are optional and show their `default`). Editors can use it for completion
 * and checking; it cannot express the checks that span keys (duplicate names,
 * interaction references, the source's form), which only `parseFitSpec` makes.
 *
 * A copy is committed as `schema/fit-spec.schema.json`; a unit test fails when it
 * differs from this function's output. Regenerate it with
 * `ROWFOLD_WRITE_SPEC_SCHEMA=1 npx vitest run test/unit/spec-json-schema.test.ts`.
 *
 * @example
 * const text = JSON.stringify(fitSpecJsonSchema(), null, 2) + '\n';
 */
export function fitSpecJsonSchema(): Record<string, unknown> {
  const generated = z.toJSONSchema(fitSpecSchema, { io: 'input', target: 'draft-2020-12' });
  const { $schema, ...rest } = generated;
  return {
    $schema,
    $comment: `Generated from src/spec/fit-spec-schema.ts; do not edit. Regenerate: ${REGENERATE}`,
    ...rest,
  };
}
