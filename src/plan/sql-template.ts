/** A bound value of a generated query: text (levels, keys) or a finite number. */
export type SqlValue = string | number;

/** A piece of generated SQL: literal SQL text, or a reference to a bound value. */
export type SqlPart = string | { readonly value: SqlValue };

/**
 * Generated SQL kept as parts, so the same query can run with bind parameters (`$1`, …)
 * or, for `COPY (…) TO STDOUT`, which takes no bind parameters, with every value rendered
 * as a quoted literal by the driver's escaping — without ever searching and replacing
 * inside SQL text (the user's source query may itself contain `$1` in a string).
 */
export class SqlTemplate {
  readonly parts: readonly SqlPart[];

  constructor(parts: readonly SqlPart[]) {
    this.parts = parts;
  }

  /** Concatenates templates and raw SQL strings. */
  static join(items: readonly (SqlTemplate | SqlPart)[], separator = ''): SqlTemplate {
    const parts: SqlPart[] = [];
    items.forEach((item, i) => {
      if (i > 0 && separator !== '') parts.push(separator);
      if (item instanceof SqlTemplate) parts.push(...item.parts);
      else parts.push(item);
    });
    return new SqlTemplate(parts);
  }

  /** The query with `$n` placeholders and its values, for the extended query protocol. */
  toBound(): { text: string; values: SqlValue[] } {
    const values: SqlValue[] = [];
    const text = this.parts
      .map((p) => {
        if (typeof p === 'string') return p;
        values.push(p.value);
        return `$${values.length}`;
      })
      .join('');
    return { text, values };
  }

  /**
   * The query with every value inlined: numbers as numerals, text through `quote`
   * (the driver's literal escaping, e.g. pg's `escapeLiteral`).
   */
  toInline(quote: (text: string) => string): string {
    return this.parts
      .map((p) => {
        if (typeof p === 'string') return p;
        if (typeof p.value === 'number') {
          if (!Number.isFinite(p.value)) throw new RangeError(`cannot inline the non-finite number ${p.value}`);
          return String(p.value);
        }
        return quote(p.value);
      })
      .join('');
  }
}

/**
 * Quotes an SQL identifier: wraps it in double quotes and doubles any double quote inside,
 * so a column named `x"; drop table t; --` stays one harmless identifier.
 */
export function quoteIdent(name: string): string {
  if (name.includes('\u0000')) throw new RangeError('an identifier cannot contain a NUL character');
  return `"${name.replaceAll('"', '""')}"`;
}
