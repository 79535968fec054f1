// `node --import ./test/support/register-typescript.mjs file.ts`: runs TypeScript sources in a
// child process (see typescript-hooks.mjs).
import { register } from 'node:module';

register('./typescript-hooks.mjs', import.meta.url);
