import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { parseDecimalDD } from '../../src/numeric/decimal-dd.js';
import { dd, ddMul } from '../../src/numeric/double-double.js';

/** Folder of the vendored NIST StRD linear-regression files (see its README.md). */
export const NIST_DIR = fileURLToPath(new URL('../fixtures/nist-strd/', import.meta.url));

/** Certified values of one StRD set, as the strings NIST printed. */
export interface NistCertified {
  readonly parameters: readonly { name: string; estimate: string; std_dev: string }[];
  readonly residual_std_dev: string;
  readonly r_squared: string;
  readonly anova: { f_statistic: string };
}

/** One StRD set: its design (terms built from the model), response and certified values. */
export interface NistSet {
  readonly name: string;
  readonly intercept: boolean;
  /** Term names excluding the intercept, e.g. `x`, `x^2` or `x1`. */
  readonly terms: readonly string[];
  /** Rows as `[terms…, y]`. */
  readonly rows: readonly number[][];
  /**
   * Rows as `[t0 hi, t0 lo, …, y hi, y lo]`: the decimal data and their powers in
   * double-double, so no digit of the published data is lost on the way in.
   */
  readonly pairRows: readonly number[][];
  /** Column names of the file (y first) and its data rows as the decimal text NIST printed. */
  readonly columns: readonly string[];
  readonly textRows: readonly string[][];
  readonly certified: NistCertified;
}

interface CertifiedFile {
  datasets: Record<
    string,
    {
      file: string;
      model: { intercept: boolean; terms: string[] };
      columns: { name: string; role: string }[];
      file_layout: { data_lines: [number, number] };
      certified: NistCertified;
    }
  >;
}

/** The eleven sets, in the order of the NIST listing. */
export const NIST_SETS = [
  'Norris', 'Pontius', 'NoInt1', 'NoInt2', 'Filip', 'Longley',
  'Wampler1', 'Wampler2', 'Wampler3', 'Wampler4', 'Wampler5',
] as const;

/** Reads one set from its .dat file (data lines as the header states) and certified.json. */
export function loadNistSet(name: string): NistSet {
  const meta = (JSON.parse(readFileSync(NIST_DIR + 'certified.json', 'utf8')) as CertifiedFile).datasets[name];
  if (!meta) throw new Error(`unknown NIST set ${name}`);
  const lines = readFileSync(NIST_DIR + meta.file, 'latin1').split('\r\n');
  const [first, last] = meta.file_layout.data_lines;
  const columns = meta.columns.map((c) => c.name);
  const terms = meta.model.terms.filter((t) => t !== '1');
  const rows: number[][] = [];
  const pairRows: number[][] = [];
  const textRows: string[][] = [];
  for (let i = first - 1; i < last; i++) {
    const texts = lines[i]!.trim().split(/\s+/);
    textRows.push(texts);
    const exact = new Map(columns.map((c, j) => [c, parseDecimalDD(texts[j]!)]));
    const pairs: number[] = [];
    for (const t of terms) {
      const power = /^(\w+)\^(\d+)$/.exec(t);
      const base = exact.get(power ? power[1]! : t)!;
      let h = base.hi;
      let l = base.lo;
      const out = dd();
      for (let k = 1; k < (power ? Number(power[2]) : 1); k++) {
        ddMul(h, l, base.hi, base.lo, out);
        h = out.hi;
        l = out.lo;
      }
      pairs.push(h, l);
    }
    pairs.push(exact.get('y')!.hi, exact.get('y')!.lo);
    pairRows.push(pairs);
    const fields = texts.map(Number);
    const byName = new Map(columns.map((c, j) => [c, fields[j]!]));
    const row = terms.map((t) => {
      const power = /^(\w+)\^(\d+)$/.exec(t);
      // Raw powers, as NIST's model states them (no centring or scaling).
      if (power) return byName.get(power[1]!)! ** Number(power[2]);
      return byName.get(t)!;
    });
    row.push(byName.get('y')!);
    rows.push(row);
  }
  return { name, intercept: meta.model.intercept, terms, rows, pairRows, columns, textRows, certified: meta.certified };
}
