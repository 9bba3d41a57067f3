/**
 * Splits a byte stream into lines over Buffers. LF ends a line; a CR right before it is removed.
 * Splitting bytes is safe for UTF-8: the byte 0x0A never occurs inside a multi-byte character.
 * A line longer than one chunk is held as a list of pieces and joined once (memory ~ one line).
 */
export class LineSplitter {
  private pieces: Buffer[] = [];

  /** Appends to `out` every line that ends in `chunk` (without its line end). */
  push(chunk: Buffer, out: Buffer[]): void {
    let start = 0;
    for (let nl = chunk.indexOf(0x0a); nl !== -1; nl = chunk.indexOf(0x0a, start)) {
      let line = chunk.subarray(start, nl);
      if (this.pieces.length > 0) {
        this.pieces.push(line);
        line = Buffer.concat(this.pieces);
        this.pieces = [];
      }
      out.push(withoutCr(line));
      start = nl + 1;
    }
    if (start < chunk.length) this.pieces.push(chunk.subarray(start));
  }

  /** The last line when the input does not end with a line end, else null. */
  end(): Buffer | null {
    if (this.pieces.length === 0) return null;
    const line = this.pieces.length === 1 ? this.pieces[0] : Buffer.concat(this.pieces);
    this.pieces = [];
    return withoutCr(line);
  }
}

function withoutCr(line: Buffer): Buffer {
  return line.length > 0 && line[line.length - 1] === 0x0d ? line.subarray(0, line.length - 1) : line;
}
