import { Buffer } from 'node:buffer';
import { EventEmitter } from 'node:events';

import type pg from 'pg';
import { describe, expect, it } from 'vitest';

import { SqlTemplate } from '../../src/plan/sql-template.js';
import { streamCopyChunks } from '../../src/source/stream-copy-chunks.js';

// The COPY reader parses the protocol's messages (PostgreSQL documentation, "Frontend/Backend
// Protocol", "Message Formats": a type byte, an int32 length that counts itself, the body)
// out of whatever the socket delivers. Here a fake socket delivers one conversation cut in
// every way; the reader must hand on exactly the CopyData payloads, pass any other message
// whole to pg's own listener, and give pg everything after CopyDone.

function message(type: string, body: Uint8Array): Buffer {
  const out = Buffer.alloc(5 + body.length);
  out[0] = type.charCodeAt(0);
  out.writeInt32BE(4 + body.length, 1);
  out.set(body, 5);
  return out;
}

const payloads = [
  Buffer.from('PGCOPY\n\xff\r\n\0\0\0\0\0\0\0\0\0', 'latin1'),
  Buffer.alloc(0),
  Buffer.from(Array.from({ length: 300 }, (_, i) => (i * 7) & 0xff)),
  Buffer.from([1, 2, 3]),
  Buffer.from([0xff, 0xff]),
];
const notice = message('N', Buffer.from('SNOTICE\0Mhello\0\0', 'latin1'));
const tail = Buffer.concat([message('C', Buffer.from('COPY 3\0', 'latin1')), message('Z', Buffer.from('I', 'latin1'))]);
const conversation = Buffer.concat([
  message('H', Buffer.from([1, 0, 1, 0, 1])),
  message('d', payloads[0]!),
  message('d', payloads[1]!),
  notice,
  message('d', payloads[2]!),
  message('d', payloads[3]!),
  message('d', payloads[4]!),
  message('c', new Uint8Array(0)),
  tail,
]);

class FakeSocket extends EventEmitter {
  pause(): this {
    return this;
  }
  resume(): this {
    return this;
  }
}

/** Runs the reader over `chunks`: the payload bytes it hands on and what pg's listener got. */
async function readCut(chunks: Buffer[]): Promise<{ data: Buffer; pg: Buffer }> {
  const socket = new FakeSocket();
  const toPg: Buffer[] = [];
  socket.on('data', (b: Buffer) => toPg.push(Buffer.from(b)));
  let submitted: { submit: (c: unknown) => void; handleReadyForQuery: () => void } | undefined;
  const client = {
    query(q: typeof submitted) {
      submitted = q;
      q!.submit({ stream: socket, query: () => undefined });
    },
  } as unknown as pg.ClientBase;
  const data: Buffer[] = [];
  const reading = (async () => {
    for await (const pieces of streamCopyChunks(client, new SqlTemplate(['SELECT 1']))) {
      for (let i = 0; i < pieces.count; i++) data.push(Buffer.from(pieces.bytes.subarray(pieces.ranges[2 * i]!, pieces.ranges[2 * i + 1]!)));
    }
  })();
  // Each chunk a buffer of its own, as socket reads are (pieces point into them).
  for (const c of chunks) socket.emit('data', Buffer.from(c));
  // pg, having parsed CommandComplete and ReadyForQuery from what it was handed.
  submitted!.handleReadyForQuery();
  await reading;
  return { data: Buffer.concat(data), pg: Buffer.concat(toPg) };
}

function cut(bytes: Buffer, sizes: readonly number[]): Buffer[] {
  const out: Buffer[] = [];
  for (let p = 0, i = 0; p < bytes.length; i++) {
    const size = sizes[i % sizes.length]!;
    out.push(bytes.subarray(p, p + size));
    p += size;
  }
  return out;
}

describe('streamCopyChunks: the protocol cut anywhere', () => {
  const expected = { data: Buffer.concat(payloads), pg: Buffer.concat([notice, tail]) };

  it('hands on the CopyData payloads and gives pg the rest, read whole', async () => {
    expect(await readCut([conversation])).toEqual(expected);
  });

  for (const sizes of [[1], [2], [3], [4], [5], [6], [7], [11], [64], [1, 4], [3, 5, 9], [6, 1, 2], [200, 1]]) {
    it(`does the same with reads of ${sizes.join(', ')} bytes (headers cut at every offset)`, async () => {
      expect(await readCut(cut(conversation, sizes))).toEqual(expected);
    });
  }

  it('does the same at every single cut into two reads', async () => {
    for (let at = 1; at < conversation.length; at++) {
      expect(await readCut([conversation.subarray(0, at), conversation.subarray(at)])).toEqual(expected);
    }
  });
});
