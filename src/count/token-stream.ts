/**
 * Token streams: the vocabulary pass writes each split's tokens as the reading thread's own term ids (int32,
 * little-endian, in corpus order, DOCUMENT_END after every document), so the pair pass reads ids instead of
 * reading and tokenizing the text a second time. The files are temporary (the work area's tmp/), 4 bytes a
 * token, written and read through fixed buffers: memory does not grow with the corpus.
 */
import { closeSync, openSync, readSync } from 'node:fs';
import { wrapWriteError, writeBytesOrThrow } from '../store/atomic.js';

/** Marks the end of a document (term ids are ≥ 0). */
export const DOCUMENT_END = -2;

const BUFFER_IDS = 1 << 18;

/** Where one split's token stream is, and which thread's term ids it holds. */
export interface TokenStreamRef {
  file: string;
  /** The vocabulary mapper whose term table numbered the ids. */
  mapper: number;
}

export class TokenStreamWriter {
  private readonly fd: number;
  private readonly ids = new Int32Array(BUFFER_IDS);
  private readonly bytes = Buffer.from(this.ids.buffer);
  private fill = 0;

  constructor(readonly file: string) {
    try {
      this.fd = openSync(file, 'w');
    } catch (e) {
      throw wrapWriteError(e, file);
    }
  }

  push(id: number): void {
    this.ids[this.fill++] = id;
    if (this.fill === BUFFER_IDS) this.flush();
  }

  private flush(): void {
    writeBytesOrThrow(this.fd, this.bytes, this.fill * 4, this.file);
    this.fill = 0;
  }

  close(): void {
    this.flush();
    closeSync(this.fd);
  }
}

/** Reads a token stream through a fixed buffer: `onIds` gets ids[0, n) of each chunk, in order. */
export function readTokenStream(file: string, onIds: (ids: Int32Array, n: number, bytes: number) => void): void {
  const ids = new Int32Array(BUFFER_IDS);
  const bytes = Buffer.from(ids.buffer);
  const fd = openSync(file, 'r');
  try {
    for (;;) {
      const n = readSync(fd, bytes, 0, bytes.length, null);
      if (n <= 0) break;
      if (n % 4 !== 0) throw new Error(`${file}: token stream cut inside an id (${n} bytes read)`);
      onIds(ids, n / 4, n);
    }
  } finally {
    closeSync(fd);
  }
}
