import { seededRandom } from './seeded-random.js';

/** Below this outdoor temperature (°C) a feeder's load rises with heating. */
export const HEATING_BASE_C = 15.5;
/** Above this outdoor temperature (°C) a feeder's load rises with cooling. */
export const COOLING_BASE_C = 18;

/**
 * The terms of the demo model, in the order the fit reports them: the intercept, five
 * weather and calendar terms, and the hours 1–23 (hour 0 is the reference level).
 */
export const DEMO_TERMS: readonly string[] = [
  'intercept',
  'heating_degrees',
  'cooling_degrees',
  'humidity_pct',
  'weekday',
  'holiday',
  ...Array.from({ length: 23 }, (_, h) => `hour_of_day=${h + 1}`),
];

/** What kind of customers a feeder mostly serves; it shapes the feeder's true coefficients. */
export type FeederKind = 'residential' | 'commercial' | 'mixed' | 'industrial';

/** One feeder and the true coefficients its load is generated from. */
export interface FeederProfile {
  /** `F01`, `F02`, … */
  readonly id: string;
  readonly zone: string;
  readonly kind: FeederKind;
  /** Standard deviation of the independent normal noise, MW. */
  readonly noiseSdMw: number;
  /** True value of every term of {@link DEMO_TERMS}, in that order. */
  readonly coefficients: readonly number[];
}

interface KindShape {
  readonly base: number;
  readonly heating: number;
  readonly cooling: number;
  readonly humidity: number;
  readonly weekday: number;
  readonly holiday: number;
  /** Daily load shape at scale 1, MW above the night minimum. */
  readonly daily: (hour: number) => number;
}

/** A smooth bump around `centre` on the 24-hour circle. */
const bump = (hour: number, centre: number, width: number) => {
  const d = Math.min(Math.abs(hour - centre), 24 - Math.abs(hour - centre));
  return Math.exp(-0.5 * (d / width) ** 2);
};

// MW per unit at a feeder of scale 1: homes peak in the evening and barely notice workdays,
// offices and shops follow the working day and close on holidays, plants run long shifts.
const SHAPES: Record<FeederKind, KindShape> = {
  residential: {
    base: 1.8, heating: 0.11, cooling: 0.09, humidity: 0.003, weekday: -0.12, holiday: 0.08,
    daily: (h) => 0.35 * bump(h, 8, 1.5) + 1.0 * bump(h, 19.5, 2.2) + 0.25 * bump(h, 13, 3),
  },
  commercial: {
    base: 2.4, heating: 0.07, cooling: 0.2, humidity: 0.005, weekday: 1.1, holiday: -0.9,
    daily: (h) => 1.2 * bump(h, 13, 3.5),
  },
  mixed: {
    base: 2.1, heating: 0.09, cooling: 0.14, humidity: 0.004, weekday: 0.45, holiday: -0.35,
    daily: (h) => 0.6 * bump(h, 9, 2) + 0.8 * bump(h, 14, 4) + 0.6 * bump(h, 19, 2),
  },
  industrial: {
    base: 4.2, heating: 0.03, cooling: 0.05, humidity: 0.001, weekday: 0.8, holiday: -1.3,
    daily: (h) => 0.5 * bump(h, 11, 5) + 0.2 * bump(h, 15, 2),
  },
};

/** Four significant digits: true values that read cleanly in a table. */
const tidy = (v: number) => Number(v.toPrecision(4));

/**
 * The profile of feeder number `index` (from 0) for a seed: its kind, size, noise and true
 * coefficients. Each feeder draws from its own stream, so feeder 3 is the same whether the
 * scenario has 4 feeders or 400.
 */
export function feederProfile(seed: number, index: number, zone: string, idWidth: number): FeederProfile {
  const id = `F${String(index + 1).padStart(idWidth, '0')}`;
  const rng = seededRandom(seed, `feeder:${id}`);
  const kind = pickKind(rng.uniform());
  const shape = SHAPES[kind];
  const scale = rng.between(0.6, 2.2);
  const jitter = () => scale * rng.between(0.85, 1.15);
  const fixed = [shape.base, shape.heating, shape.cooling, shape.humidity, shape.weekday, shape.holiday].map(
    (v) => tidy(v * jitter()),
  );
  const amplitude = jitter();
  const hours = Array.from({ length: 23 }, (_, i) =>
    tidy(amplitude * (shape.daily(i + 1) - shape.daily(0)) + 0.02 * scale * rng.normal()),
  );
  return { id, zone, kind, noiseSdMw: tidy(scale * rng.between(0.07, 0.12)), coefficients: [...fixed, ...hours] };
}

function pickKind(u: number): FeederKind {
  if (u < 0.4) return 'residential';
  if (u < 0.65) return 'commercial';
  if (u < 0.9) return 'mixed';
  return 'industrial';
}
