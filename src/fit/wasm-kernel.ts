import { existsSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { WasmFold } from '../numeric/wasm-fold.js';

let loaded: WasmFold | null | undefined;

/**
 * The WebAssembly fold kernel, or null when it is not built or switched off
 * (`ROWFOLD_KERNEL=js`): the plain TypeScript kernel is then used, with the same results
 * to about 1e-13 relative (the SIMD kernel sums in pairs of rows).
 *
 * The compiled file is dist/kernels/householder-fold.wasm under the package root (found by
 * walking up from this module, which runs from src/ under the test runner and from
 * dist/src/ when built).
 */
export function wasmFold(): WasmFold | null {
  if (loaded !== undefined) return loaded;
  loaded = null;
  if (process.env['ROWFOLD_KERNEL'] === 'js') return loaded;
  let dir = dirname(fileURLToPath(import.meta.url));
  for (let i = 0; i < 5; i++) {
    const file = join(dir, 'dist', 'kernels', 'householder-fold.wasm');
    if (existsSync(file)) {
      try {
        loaded = new WasmFold(readFileSync(file));
      } catch {
        // A runtime without WebAssembly SIMD: keep the TypeScript kernel.
        loaded = null;
      }
      break;
    }
    dir = dirname(dir);
  }
  return loaded;
}
