/** A seeded source of uniform and standard normal draws. */
export interface SeededRandom {
  /** Uniform on [0, 1). */
  uniform(): number;
  /** Uniform on [lo, hi). */
  between(lo: number, hi: number): number;
  /** Standard normal. */
  normal(): number;
}

/**
 * A deterministic random stream named by a seed and a label, so each part of the scenario
 * (a feeder's coefficients, its noise, a zone's weather) draws from its own stream: adding a
 * feeder or a day does not change what the others draw.
 *
 * mulberry32 for uniforms (fast, 32-bit state, good enough for a demo) and Box–Muller for
 * normals; both halves of each Box–Muller pair are used.
 *
 * @example
 * const r = seededRandom(1, 'noise:F07');
 * r.normal(); // the same value on every machine
 */
export function seededRandom(seed: number, label: string): SeededRandom {
  let state = hash32(`${seed}:${label}`);
  const uniform = () => {
    state = (state + 0x6d2b79f5) >>> 0;
    let t = state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  let spare: number | null = null;
  return {
    uniform,
    between: (lo, hi) => lo + (hi - lo) * uniform(),
    normal() {
      if (spare !== null) {
        const z = spare;
        spare = null;
        return z;
      }
      // 1 − u is in (0, 1], so the logarithm is finite.
      const r = Math.sqrt(-2 * Math.log(1 - uniform()));
      const a = 2 * Math.PI * uniform();
      spare = r * Math.sin(a);
      return r * Math.cos(a);
    },
  };
}

/** FNV-1a hash of a string, 32 bits. */
function hash32(text: string): number {
  let h = 0x811c9dc5;
  for (let i = 0; i < text.length; i++) {
    h ^= text.charCodeAt(i);
    h = Math.imul(h, 0x01000193);
  }
  return h >>> 0;
}
