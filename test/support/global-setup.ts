import { rm } from 'node:fs/promises';
import { dirname } from 'node:path';

import type { TestProject } from 'vitest/node';

import { makeEmbeddedTemplate } from './embedded-template.js';
import { chooseTestBackend } from './test-backend.js';

/**
 * Once per run: decides the database back end of the integration tests and makes the
 * embedded-database template that test databases are copied from (the embedded-* tests use
 * it whatever the back end); removes the template afterwards.
 */
export default async function setup(project: TestProject): Promise<() => Promise<void>> {
  const backend = await chooseTestBackend();
  const template = await makeEmbeddedTemplate();
  project.provide('rowfoldTestBackend', backend);
  project.provide('rowfoldEmbeddedTemplate', template);
  console.log(`integration tests: ${backend === 'server' ? 'PostgreSQL server' : 'embedded database (PGlite)'}`);
  return async () => {
    await rm(dirname(template), { recursive: true, force: true });
  };
}
