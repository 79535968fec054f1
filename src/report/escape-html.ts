/**
 * Escapes text for HTML element content and double-quoted attribute values.
 *
 * @example
 * escapeHtml('a < b & "c"'); // 'a &lt; b &amp; &quot;c&quot;'
 */
export function escapeHtml(text: string): string {
  return text.replaceAll('&', '&amp;').replaceAll('<', '&lt;').replaceAll('>', '&gt;').replaceAll('"', '&quot;').replaceAll("'", '&#39;');
}
