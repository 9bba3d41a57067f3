import { open } from 'node:fs/promises';
import { constants, type Stats } from 'node:fs';
import type { Readable } from 'node:stream';
import { createGunzip } from 'node:zlib';
import { KindredError } from '../errors.js';
import { fsErrorFor, isFsError } from './fs-errors.js';

/** Size of the chunks read from disk. */
export const READ_CHUNK_BYTES = 1 << 16;

/** The two magic bytes that start every gzip member (RFC 1952, section 2.3.1). */
const GZIP_MAGIC_0 = 0x1f;
const GZIP_MAGIC_1 = 0x8b;

/**
 * Streams the content bytes of a file: gunzipped when the file starts with the gzip magic bytes
 * (whatever its name), with a leading UTF-8 byte-order mark removed.
 * `onDiskBytes` is called with the number of bytes read from disk for every chunk.
 */
export async function* readContentBytes(file: string, onDiskBytes: (n: number) => void): AsyncGenerator<Buffer> {
  let source: Readable;
  let gzipped: boolean;
  try {
    // O_NONBLOCK: opening a FIFO must not wait for a writer (it would hang the build); fstat then refuses it
    const handle = await open(file, constants.O_RDONLY | constants.O_NONBLOCK);
    try {
      const st = await handle.stat();
      if (!st.isFile()) throw new KindredError(`${file}: cannot read input file: ${notRegular(st)}; list regular files only`);
      const magic = Buffer.alloc(2);
      const { bytesRead } = await handle.read(magic, 0, 2, 0);
      gzipped = bytesRead === 2 && magic[0] === GZIP_MAGIC_0 && magic[1] === GZIP_MAGIC_1;
    } catch (e) {
      await handle.close();
      throw e;
    }
    source = handle.createReadStream({ start: 0, highWaterMark: READ_CHUNK_BYTES });
  } catch (e) {
    throw fsErrorFor(file, e);
  }

  let content: Readable = source;
  if (gzipped) {
    const gunzip = createGunzip();
    source.on('error', (e) => gunzip.destroy(e));
    source.on('data', (c: Buffer) => onDiskBytes(c.length));
    source.pipe(gunzip);
    content = gunzip;
  }

  let atStart = true;
  let pending: Buffer | null = null;
  try {
    for await (const raw of content) {
      let chunk = raw as Buffer;
      if (!gzipped) onDiskBytes(chunk.length);
      if (atStart) {
        if (pending) chunk = Buffer.concat([pending, chunk]);
        if (chunk.length < 3) {
          pending = chunk;
          continue;
        }
        atStart = false;
        pending = null;
        if (chunk[0] === 0xef && chunk[1] === 0xbb && chunk[2] === 0xbf) chunk = chunk.subarray(3);
      }
      if (chunk.length > 0) yield chunk;
    }
  } catch (e) {
    if (isFsError(e)) throw fsErrorFor(file, e);
    if (gzipped && isZlibError(e)) {
      throw new KindredError(
        `${file}: truncated or corrupt gzip data (${oneLine(e.message)}); re-create or re-download the file`,
      );
    }
    throw e;
  } finally {
    source.destroy();
    if (content !== source) content.destroy();
  }
  // A file shorter than three bytes cannot hold a byte-order mark.
  if (pending && pending.length > 0) yield pending;
}

function notRegular(st: Stats): string {
  if (st.isDirectory()) return 'it is a directory (EISDIR)';
  if (st.isFIFO()) return 'it is a FIFO (named pipe), not a regular file';
  if (st.isSocket()) return 'it is a socket, not a regular file';
  if (st.isCharacterDevice() || st.isBlockDevice()) return 'it is a device, not a regular file';
  return 'it is not a regular file';
}

function isZlibError(e: unknown): e is Error {
  return e instanceof Error && typeof (e as NodeJS.ErrnoException).code === 'string' && (e as NodeJS.ErrnoException).code!.startsWith('Z_');
}

/** Makes a message safe to embed in a one-line error: control characters become spaces, long text is cut. */
export function oneLine(message: string, max = 200): string {
  // eslint-disable-next-line no-control-regex
  const flat = message.replace(/[\u0000-\u001f\u007f]+/g, ' ').trim();
  return flat.length > max ? `${flat.slice(0, max)}...` : flat;
}
