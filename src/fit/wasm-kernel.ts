import { existsSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { WasmCompensated } from '../numeric/wasm-compensated.js';
import { WasmFold } from '../numeric/wasm-fold.js';

let loaded: WasmFold | null | undefined;
let loadedCompensated: WasmCompensated | null | undefined;

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
  if (loaded === undefined) loaded = instantiate('householder-fold.wasm', (bytes) => new WasmFold(bytes));
  return loaded;
}

/**
 * The WebAssembly compensated-arithmetic kernels (residual sums), found and switched off as
 * {@link wasmFold} is; null means the TypeScript kernels (same sums to rounding).
 */
export function wasmCompensated(): WasmCompensated | null {
  if (loadedCompensated === undefined) loadedCompensated = instantiate('compensated.wasm', (bytes) => new WasmCompensated(bytes));
  return loadedCompensated;
}

/** dist/kernels/NAME under the package root, instantiated; null when absent, switched off or unsupported. */
function instantiate<T>(name: string, make: (bytes: Uint8Array) => T): T | null {
  if (process.env['ROWFOLD_KERNEL'] === 'js') return null;
  let dir = dirname(fileURLToPath(import.meta.url));
  for (let i = 0; i < 5; i++) {
    const file = join(dir, 'dist', 'kernels', name);
    if (existsSync(file)) {
      try {
        return make(readFileSync(file));
      } catch {
        // A runtime without WebAssembly SIMD: keep the TypeScript kernel.
        return null;
      }
    }
    dir = dirname(dir);
  }
  return null;
}
