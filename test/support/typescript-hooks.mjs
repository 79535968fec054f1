// Module hooks that let a plain `node` child process run the TypeScript sources, as the
// tests do under vitest: `import './x.js'` finds `x.ts`, and .ts files are transpiled one by
// one with the project's TypeScript (types are not checked here; `npm run typecheck` does).
// Registered by test/support/register-typescript.mjs (`node --import …`). Transpiled text is
// cached by content hash in the temporary folder, so only the first child pays for it.
import { createHash } from 'node:crypto';
import { mkdir, readFile, rename, writeFile } from 'node:fs/promises';
import { createRequire } from 'node:module';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';

const require = createRequire(import.meta.url);
const CACHE_DIR = join(tmpdir(), `rowfold-ts-cache-${require('typescript/package.json').version}`);
/** TypeScript itself is loaded only when a file is not in the cache. */
let typescript;

const COMPILER_OPTIONS = {
  module: 'ESNext',
  target: 'ES2022',
  verbatimModuleSyntax: true,
  inlineSourceMap: true,
};

export async function resolve(specifier, context, nextResolve) {
  try {
    return await nextResolve(specifier, context);
  } catch (error) {
    const relative = specifier.startsWith('.') || specifier.startsWith('/') || specifier.startsWith('file:');
    if (relative && specifier.endsWith('.js')) return nextResolve(`${specifier.slice(0, -3)}.ts`, context);
    throw error;
  }
}

export async function load(url, context, nextLoad) {
  if (!url.startsWith('file:') || !url.endsWith('.ts')) return nextLoad(url, context);
  const fileName = fileURLToPath(url);
  const text = await readFile(fileName, 'utf8');
  const cached = join(CACHE_DIR, `${createHash('sha256').update(fileName).update('\0').update(text).digest('hex')}.js`);
  try {
    return { format: 'module', source: await readFile(cached, 'utf8'), shortCircuit: true };
  } catch {
    // not cached yet
  }
  typescript ??= (await import('typescript')).default;
  const compilerOptions = typescript.convertCompilerOptionsFromJson(COMPILER_OPTIONS, '').options;
  const { outputText } = typescript.transpileModule(text, { compilerOptions, fileName });
  await mkdir(CACHE_DIR, { recursive: true });
  // Written aside and renamed, so a concurrent reader never sees half a file.
  const temporary = `${cached}.${process.pid}.tmp`;
  await writeFile(temporary, outputText);
  await rename(temporary, cached);
  return { format: 'module', source: outputText, shortCircuit: true };
}
