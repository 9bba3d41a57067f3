/**
 * Token streams: the vocabulary pass writes each split's tokens as the reading thread's own term ids (int32,
 * little-endian, in corpus order, DOCUMENT_END after every document), so the pair pass reads ids instead of
 * reading and tokenizing the text a second time. The files are temporary (the work area's tmp/), 4 bytes a
 * token, written through a fixed buffer and read chunk by chunk (chunks.ts).
 */
import { closeSync, openSync, rmSync } from 'node:fs';
import { wrapWriteError, writeBytesOrThrow } from '../store/atomic.js';
import { giveBuffer, takeBuffer } from '../store/buffer-pool.js';

/** Marks the end of a document (term ids are ≥ 0). */
export const DOCUMENT_END = -2;

const BUFFER_IDS = 1 << 18;
const FIRST_WRITE_IDS = 1 << 10;

/** Where one split's token stream is, and which thread's term ids it holds. */
export interface TokenStreamRef {
  file: string;
  /** The vocabulary mapper whose term table numbered the ids. */
  mapper: number;
}

export class TokenStreamWriter {
  private readonly fd: number;
  private readonly bytes = takeBuffer(4 * BUFFER_IDS);
  private readonly ids = new Int32Array(this.bytes.buffer, this.bytes.byteOffset, BUFFER_IDS);
  private fill = 0;
  /**
   * Ids held before the next write: small for the first, so that the writing path runs while the tokenizer
   * that calls push is still interpreted (a path first taken by compiled code sends it back to the interpreter).
   */
  private limit = FIRST_WRITE_IDS;

  constructor(readonly file: string) {
    try {
      this.fd = openSync(file, 'w');
    } catch (e) {
      throw wrapWriteError(e, file);
    }
  }

  push(id: number): void {
    this.ids[this.fill++] = id;
    if (this.fill === this.limit) this.flush();
  }

  private flush(): void {
    writeBytesOrThrow(this.fd, this.bytes, this.fill * 4, this.file);
    this.fill = 0;
    this.limit = BUFFER_IDS;
  }

  close(): void {
    try {
      this.flush();
    } finally {
      closeSync(this.fd);
      giveBuffer(this.bytes);
    }
  }

  /** Closes the stream and removes its file (the stream is not needed, or not complete). */
  discard(): void {
    try {
      closeSync(this.fd);
    } finally {
      giveBuffer(this.bytes);
      rmSync(this.file, { force: true });
    }
  }
}
