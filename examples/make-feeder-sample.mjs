// Writes examples/feeder-sample.csv: eight weeks of synthetic hourly load on one feeder of
// a regional electricity distributor (our demo scenario), with known true coefficients:
//   load_mw = 3.2 + 0.11·temp_c + 0.012·humidity_pct + 0.65·is_weekday − 0.4·is_holiday
//             + 0.9·is_daytime + noise(σ = 0.25)
// About 1% of readings are missing (empty load_mw). Run: node examples/make-feeder-sample.mjs
import { writeFileSync } from 'node:fs';

let state = 20261201;
const uniform = () => {
  state = (state + 0x6d2b79f5) >>> 0;
  let t = state;
  t = Math.imul(t ^ (t >>> 15), t | 1);
  t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
  return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
};
const normal = () => Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform());

const holidays = new Set([10, 38]); // day numbers within the sample
const lines = ['hour_start,temp_c,humidity_pct,is_weekday,is_holiday,is_daytime,load_mw'];
const start = Date.UTC(2026, 5, 1);
for (let h = 0; h < 56 * 24; h++) {
  const day = Math.floor(h / 24);
  const hour = h % 24;
  const weekday = (new Date(start + h * 3600e3).getUTCDay() + 6) % 7 < 5 ? 1 : 0;
  const holiday = holidays.has(day) ? 1 : 0;
  const daytime = hour >= 7 && hour < 20 ? 1 : 0;
  const temp = 18 + 7 * Math.sin(((hour - 9) / 24) * 2 * Math.PI) + 3 * Math.sin(day / 9) + 1.5 * normal();
  const humidity = Math.min(100, Math.max(15, 65 - 1.2 * (temp - 18) + 8 * normal()));
  const load = 3.2 + 0.11 * temp + 0.012 * humidity + 0.65 * weekday - 0.4 * holiday + 0.9 * daytime + 0.25 * normal();
  const missing = uniform() < 0.01;
  lines.push(
    [
      new Date(start + h * 3600e3).toISOString(),
      temp.toFixed(2),
      humidity.toFixed(1),
      weekday,
      holiday,
      daytime,
      missing ? '' : load.toFixed(4),
    ].join(','),
  );
}
writeFileSync(new URL('./feeder-sample.csv', import.meta.url), lines.join('\n') + '\n');
