/**
 * Drives `COPY … FROM STDIN` on a node-postgres client the caller already holds (it opens no
 * connection): shared by the sessions of source/ and the result store of store/.
 */
import { Buffer } from 'node:buffer';

import type pg from 'pg';

/** The part of pg's connection a COPY FROM writer drives (what pg hands a submitted query). */
interface ProtocolConnection {
  readonly stream: NodeJS.WritableStream & { writableNeedDrain?: boolean };
  query(text: string): void;
  sendCopyFromChunk(chunk: Buffer): void;
  endCopyFrom(): void;
}

/** CopyData messages carry at most this much each (the server reads them whole). */
const MESSAGE_BYTES = 256 * 1024;

/**
 * A `COPY … FROM STDIN` run as a pg submittable: at CopyInResponse it sends the given bytes as
 * CopyData messages, waiting for the socket to drain between them, then CopyDone; the row
 * count comes from CommandComplete.
 */
class CopyInWriter {
  readonly text: string;
  private readonly data: Uint8Array;
  private rowCount = 0;
  private error: unknown;
  private settle: ((result: { rows: number } | { error: unknown }) => void) | undefined;
  readonly done: Promise<{ rows: number } | { error: unknown }>;

  constructor(text: string, data: Uint8Array) {
    this.text = text;
    this.data = data;
    this.done = new Promise((resolve) => (this.settle = resolve));
  }

  /** pg's submittable protocol: called when this query's turn comes. */
  submit(connection: ProtocolConnection): void {
    connection.query(this.text);
  }

  /** pg: the server is ready for the COPY data. */
  handleCopyInResponse(connection: ProtocolConnection): void {
    void this.send(connection);
  }

  private async send(connection: ProtocolConnection): Promise<void> {
    const stream = connection.stream;
    for (let at = 0; at < this.data.byteLength; at += MESSAGE_BYTES) {
      const piece = this.data.subarray(at, Math.min(at + MESSAGE_BYTES, this.data.byteLength));
      connection.sendCopyFromChunk(Buffer.from(piece.buffer, piece.byteOffset, piece.byteLength));
      if (stream.writableNeedDrain === true) await new Promise<void>((resolve) => stream.once('drain', () => resolve()));
      if (this.error !== undefined) return;
    }
    connection.endCopyFrom();
  }

  /** pg: CommandComplete (`COPY n`). */
  handleCommandComplete(message: { text?: string }): void {
    const n = /^COPY (\d+)$/.exec(message.text ?? '');
    this.rowCount = n === null ? 0 : Number(n[1]);
  }

  /**
   * pg: an ErrorResponse, or a broken connection. pg lets go of the query at an error (its
   * ReadyForQuery then reaches no query), so the statement is settled here, as pg's own queries
   * are; CopyData still on its way is dropped by the server.
   */
  handleError(error: unknown): void {
    this.error = error;
    this.settle?.({ error });
  }

  /** pg: ReadyForQuery — the statement is over. */
  handleReadyForQuery(): void {
    this.settle?.(this.error === undefined ? { rows: this.rowCount } : { error: this.error });
  }

  /** pg may call these for other message types; a COPY FROM has none of them. */
  handleRowDescription(): void {}
  handleDataRow(): void {}
  handleCopyData(): void {}
  handleEmptyQuery(): void {}
  handlePortalSuspended(): void {}
}

/**
 * Runs `copySql` (a `COPY … FROM STDIN (FORMAT binary)` statement) on the client with `data`,
 * one whole COPY file, as its input; resolves to the number of rows copied. A server error
 * rejects with pg's error (its SQLSTATE `code` kept).
 */
export async function copyInto(client: pg.ClientBase, copySql: string, data: Uint8Array): Promise<number> {
  const writer = new CopyInWriter(copySql, data);
  // pg's Client.query accepts any object with `submit` (a submittable) and returns it.
  (client as unknown as { query(q: unknown): unknown }).query(writer);
  const result = await writer.done;
  if ('error' in result) throw result.error;
  return result.rows;
}
