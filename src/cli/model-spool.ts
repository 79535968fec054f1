import { createReadStream } from 'node:fs';
import { mkdtemp, open, rm } from 'node:fs/promises';
import type { FileHandle } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import { writeSync } from 'node:fs';
import type { ModelDocument } from '../run/fit-document.js';

/** Bytes of JSON gathered before they are written to the spool file. */
const FLUSH_BYTES = 1 << 20;

/**
 * The models of `--json`, written to a temporary file as they are published, then streamed to
 * stdout inside the document: memory stays at one buffer however many models a run has.
 */
export class ModelSpool {
  private buffer: string[] = [];
  private bytes = 0;
  private count = 0;

  private constructor(
    private readonly dir: string,
    private readonly file: FileHandle,
  ) {}

  /** A spool in a fresh folder under the system's temporary directory. */
  static async open(): Promise<ModelSpool> {
    const dir = await mkdtemp(join(tmpdir(), 'rowfold-json-'));
    return new ModelSpool(dir, await open(join(dir, 'models.json'), 'w+'));
  }

  /** Appends one model document (synchronously: it is called from the publishing loop). */
  add(m: ModelDocument): void {
    const text = (this.count++ === 0 ? '' : ',') + JSON.stringify(m);
    this.buffer.push(text);
    this.bytes += text.length;
    if (this.bytes >= FLUSH_BYTES) this.flush();
  }

  private flush(): void {
    if (this.buffer.length === 0) return;
    writeSync(this.file.fd, this.buffer.join(''));
    this.buffer = [];
    this.bytes = 0;
  }

  /** Writes `head`, the spooled models and `tail` to `out` (stdout by default), minding backpressure. */
  async writeDocument(head: string, tail: string, out: NodeJS.WritableStream = process.stdout): Promise<void> {
    this.flush();
    await writeText(out, head);
    const dest = new Writable({
      write(chunk: Buffer, _enc, cb) {
        if (out.write(chunk)) cb();
        else out.once('drain', () => cb());
      },
    });
    await pipeline(createReadStream('', { fd: this.file.fd, start: 0, autoClose: false }), dest);
    await writeText(out, tail);
  }

  /** Closes and removes the spool file. */
  async close(): Promise<void> {
    await this.file.close().catch(() => undefined);
    await rm(this.dir, { recursive: true, force: true });
  }
}

function writeText(out: NodeJS.WritableStream, text: string): Promise<void> {
  return new Promise((resolve) => {
    if (out.write(text)) resolve();
    else out.once('drain', () => resolve());
  });
}
