import type pg from 'pg';
import type { DbSession, QueryOutcome } from './database.js';
import { copyInto } from '../common/copy-in.js';
import { readDesign } from './read-design.js';
import { streamCopyChunks } from './stream-copy-chunks.js';

/** A session over one checked-out pg client. */
export function pgSession(client: pg.ClientBase): DbSession {
  return {
    async query(text: string, values: readonly unknown[] = []): Promise<QueryOutcome> {
      const r = await client.query<unknown[]>({ text, values: [...values], rowMode: 'array' });
      return { fields: r.fields.map((f) => ({ name: f.name, dataTypeID: f.dataTypeID })), rows: r.rows };
    },
    async exec(sql: string): Promise<void> {
      await client.query(sql);
    },
    readDesign: (req, sink) => readDesign(client, req, sink),
    copyOut: (query, signal) => streamCopyChunks(client, query, signal),
    copyIn: (table, columns, data) => copyInto(client, `COPY ${table} (${columns.join(', ')}) FROM STDIN (FORMAT binary)`, data),
  };
}
