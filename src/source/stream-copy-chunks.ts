import { Buffer } from 'node:buffer';
import type { Socket } from 'node:net';

import { escapeLiteral } from 'pg';
import type pg from 'pg';

import type { SqlTemplate } from '../plan/sql-template.js';
import type { CopyPieces } from './copy-binary-decoder.js';

/** The part of pg's connection a COPY reader drives (what pg hands a submitted query). */
interface ProtocolConnection {
  readonly stream: Socket;
  query(text: string): void;
}

/** A CopyData message as pg's parser hands it on: the payload, a view into the bytes it parsed. */
interface CopyDataMessage {
  readonly chunk: Buffer;
}

/** The payloads of the CopyData messages of one socket read, gathered where they lie. */
interface OpenPieces {
  readonly base: ArrayBufferLike;
  readonly bytes: Buffer;
  ranges: Int32Array;
  count: number;
}

/**
 * A `COPY … TO STDOUT` run as a pg submittable: pg's connection parses the protocol and hands
 * each CopyData message to {@link handleCopyData}, as it does for the COPY submittables of
 * other packages; notices, errors, CommandComplete and ReadyForQuery take pg's own paths.
 * The payloads are views into the bytes pg's parser holds, and they stay valid only until
 * the parser takes the socket's next read (it may write the next read over them). So the
 * payloads of one read are gathered where they lie — their ranges in one buffer, never
 * copied together — and the socket is paused at the first frame of every read: the parser
 * sees no more bytes until the reader has asked for the next read, by which time the decoder
 * is done with this one's (it copies only the tuple that straddles two reads). The read's
 * frames all arrive within one parse, so a microtask queued at the first frame hands them
 * on as one piece. TCP flow control holds the server back meanwhile.
 */
class CopyOutReader {
  readonly text: string;
  private stream: Socket | undefined;
  private readonly queue: CopyPieces[] = [];
  private open: OpenPieces | undefined;
  private wake: (() => void) | undefined;
  private failure: unknown;
  private failed = false;
  private ready = false;
  private paused = false;
  private discarding = false;
  private view: { base: ArrayBufferLike; bytes: Buffer } | undefined;

  constructor(text: string) {
    this.text = text;
  }

  /** pg's submittable protocol: called when this query's turn comes. */
  submit(connection: ProtocolConnection): void {
    this.stream = connection.stream;
    connection.query(this.text);
  }

  /** pg: one CopyData message, its payload a view into the bytes pg's parser holds. */
  handleCopyData(message: CopyDataMessage): void {
    if (this.discarding || this.failed) return;
    const chunk = message.chunk;
    let open = this.open;
    if (open === undefined || open.base !== chunk.buffer) {
      if (open !== undefined) this.seal();
      open = this.open = { base: chunk.buffer, bytes: this.bytesOf(chunk.buffer), ranges: new Int32Array(64), count: 0 };
      // The first frame of a read: nothing more is parsed until these bytes are decoded.
      if (!this.paused) {
        this.paused = true;
        this.stream?.pause();
      }
      queueMicrotask(this.sealRead);
    }
    if (2 * open.count + 2 > open.ranges.length) {
      const grown = new Int32Array(open.ranges.length * 2);
      grown.set(open.ranges);
      open.ranges = grown;
    }
    open.ranges[2 * open.count] = chunk.byteOffset;
    open.ranges[2 * open.count + 1] = chunk.byteOffset + chunk.byteLength;
    open.count++;
  }

  /** pg: an ErrorResponse, or a broken connection. */
  handleError(error: unknown): void {
    this.fail(error);
  }

  /** pg: CommandComplete after CopyDone. */
  handleCommandComplete(): void {}

  /** pg: ReadyForQuery — the COPY is over and the connection usable again. */
  handleReadyForQuery(): void {
    this.ready = true;
    this.notify();
  }

  /**
   * The next read's pieces, or null at the end; throws what failed the COPY. Calling it says
   * the pieces it returned last are done with: the socket may take the next read.
   */
  async next(): Promise<CopyPieces | null> {
    for (;;) {
      if (this.failed) throw this.failure;
      const pieces = this.queue.shift();
      if (pieces !== undefined) return pieces;
      this.resume();
      if (this.ready) return null;
      await new Promise<void>((resolve) => (this.wake = resolve));
    }
  }

  /** Stops the COPY for its reader: what is still to come is parsed by pg and dropped. */
  discard(): void {
    this.discarding = true;
    this.queue.length = 0;
    this.open = undefined;
    this.resume();
  }

  fail(error: unknown): void {
    if (this.failed) return;
    this.failed = true;
    this.failure = error;
    this.notify();
  }

  private resume(): void {
    if (!this.paused) return;
    this.paused = false;
    this.stream?.resume();
  }

  private notify(): void {
    const wake = this.wake;
    this.wake = undefined;
    wake?.();
  }

  /** After the parse that brought a read's first frame: its frames are all in. */
  private readonly sealRead = (): void => {
    if (this.open !== undefined) this.seal();
  };

  private seal(): void {
    const open = this.open!;
    this.open = undefined;
    if (this.discarding || this.failed) return;
    this.queue.push({ bytes: open.bytes, ranges: open.ranges, count: open.count });
    this.notify();
  }

  /** A Buffer over the whole of pg's parse buffer (the ranges are offsets into it), made once per buffer. */
  private bytesOf(base: ArrayBufferLike): Buffer {
    if (this.view?.base !== base) this.view = { base, bytes: Buffer.from(base as ArrayBuffer) };
    return this.view.bytes;
  }
}

/**
 * The bytes of `COPY (query) TO STDOUT (FORMAT binary)`, one socket read at a time as it
 * arrives: where the CopyData payloads lie in the read (see CopyPieces), not a copy of them,
 * so a decoder reads the tuples in place.
 *
 * COPY takes no bind parameters, so the query's values are inlined as literals with pg's own
 * `escapeLiteral` (which doubles quotes and switches to an `E''` literal when there are
 * backslashes), never by searching the SQL text. The newline before `)` keeps a trailing
 * `--` comment in the user's SQL from swallowing the closing parenthesis.
 *
 * Pull-based: the socket is paused at each read until the consumer asks for the next one, so
 * the server is held back by TCP flow control rather than buffered in memory. A consumer that stops
 * early (or an abort) leaves the rest of the COPY to be read and dropped; the owner should
 * still discard the client after a failed read.
 */
export async function* streamCopyChunks(
  client: pg.ClientBase,
  query: SqlTemplate,
  signal?: AbortSignal,
): AsyncGenerator<CopyPieces, void, undefined> {
  signal?.throwIfAborted();
  const reader = new CopyOutReader(`COPY (${query.toInline(escapeLiteral)}\n) TO STDOUT (FORMAT binary)`);
  const onAbort = () => reader.fail(signal!.reason);
  signal?.addEventListener('abort', onAbort, { once: true });
  // pg's query() takes any object with submit(); its handle*() calls come back to it.
  void (client.query as unknown as (q: CopyOutReader) => unknown)(reader);
  try {
    for (;;) {
      const pieces = await reader.next();
      if (pieces === null) return;
      yield pieces;
    }
  } finally {
    signal?.removeEventListener('abort', onAbort);
    reader.discard();
  }
}
