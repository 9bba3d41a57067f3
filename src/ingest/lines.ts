/**
 * Splits a byte stream into lines over Buffers. LF ends a line; a CR right before it is removed.
 * Splitting bytes is safe for UTF-8: the byte 0x0A never occurs inside a multi-byte character.
 * A line longer than one chunk is held as a list of pieces and joined once (memory ~ one line); a line
 * longer than `maxLineBytes` is not held at all: it comes out as OVERLONG_LINE.
 */

/** Stands for a line longer than the limit (compare by identity; it is empty, so unaware readers skip it). */
export const OVERLONG_LINE: Buffer = Buffer.alloc(0);

export class LineSplitter {
  private pieces: Buffer[] = [];
  private held = 0;
  private overlong = false;

  constructor(private readonly maxLineBytes = Infinity) {}

  /** Appends to `out` every line that ends in `chunk` (without its line end). */
  push(chunk: Buffer, out: Buffer[]): void {
    let start = 0;
    for (let nl = chunk.indexOf(0x0a); nl !== -1; nl = chunk.indexOf(0x0a, start)) {
      let line = chunk.subarray(start, nl);
      if (this.overlong || this.held + line.length > this.maxLineBytes) {
        out.push(OVERLONG_LINE);
        this.reset();
        start = nl + 1;
        continue;
      }
      if (this.pieces.length > 0) {
        this.pieces.push(line);
        line = Buffer.concat(this.pieces);
        this.reset();
      }
      out.push(withoutCr(line));
      start = nl + 1;
    }
    if (start < chunk.length) this.hold(chunk.subarray(start));
  }

  /** The last line when the input does not end with a line end, else null. */
  end(): Buffer | null {
    if (this.overlong) {
      this.reset();
      return OVERLONG_LINE;
    }
    if (this.pieces.length === 0) return null;
    const line = this.pieces.length === 1 ? this.pieces[0] : Buffer.concat(this.pieces);
    this.reset();
    return withoutCr(line);
  }

  private hold(piece: Buffer): void {
    if (this.overlong) return;
    this.held += piece.length;
    if (this.held > this.maxLineBytes) {
      this.overlong = true;
      this.pieces = [];
      return;
    }
    this.pieces.push(piece);
  }

  private reset(): void {
    this.pieces = [];
    this.held = 0;
    this.overlong = false;
  }
}

function withoutCr(line: Buffer): Buffer {
  return line.length > 0 && line[line.length - 1] === 0x0d ? line.subarray(0, line.length - 1) : line;
}
