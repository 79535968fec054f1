/**
 * The password of a URL: everything between `user:` and the last `@` of the authority (a
 * password may contain unescaped `@` or `:`, but not `/`, `?`, `#`). Any scheme, not only
 * `postgres(ql)://`: a mistyped scheme (`postgress://`, `jdbc:postgresql://`, `mysql://`) is
 * exactly what ends up quoted in an error message.
 */
const URL_PASSWORD = /([a-z][a-z0-9+.-]*:\/\/[^\s/?#@:]*:)[^\s/?#]*(?=@)/gi;

/**
 * A `password=value` pair: libpq's conninfo form (`password='a b'`), a URL query parameter
 * (`?password=x&…`) or an environment assignment (`PGPASSWORD=x`).
 */
const KEY_VALUE_PASSWORD = /(password\s*=\s*)(?:'(?:[^'\\]|\\.)*'|"(?:[^"\\]|\\.)*"|[^\s&;,'"]+)/gi;

/**
 * Replaces every database password inside `text` with `***`, so that a connection string can
 * be quoted in a message or a log line.
 *
 * Covers the password of `postgres(ql)://user:password@host` URLs (and URLs of any other
 * scheme) anywhere in the text, and
 * `password=…` key/value forms (libpq conninfo strings, URL query parameters, `PGPASSWORD=…`).
 * A URL without a password is left as it is.
 *
 * @example
 * maskSecrets('cannot reach postgres://ana:s3cret@db:5432/sales');
 * // → 'cannot reach postgres://ana:***@db:5432/sales'
 * maskSecrets("host=db password='s3 cret' dbname=sales");
 * // → "host=db password=*** dbname=sales"
 */
export function maskSecrets(text: string): string {
  return text.replace(URL_PASSWORD, '$1***').replace(KEY_VALUE_PASSWORD, '$1***');
}
