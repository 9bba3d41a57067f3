/**
 * UTF-8 decoding that replaces invalid byte sequences by U+FFFD and counts the replacements.
 *
 * TextDecoder (WHATWG Encoding Standard) emits one U+FFFD per maximal invalid subpart. A genuine
 * U+FFFD in the input is the byte sequence EF BF BD, which always decodes to exactly one U+FFFD
 * (EF can never be a continuation byte), so: replacements = U+FFFD in output - EF BF BD in input.
 */

const REPLACEMENT_CHAR = '\uFFFD';
const ENCODED_REPLACEMENT = Buffer.from([0xef, 0xbf, 0xbd]);

/** Number of U+FFFD characters in s. */
export function countReplacementChars(s: string): number {
  let n = 0;
  for (let i = s.indexOf(REPLACEMENT_CHAR); i !== -1; i = s.indexOf(REPLACEMENT_CHAR, i + 1)) n++;
  return n;
}

/** Number of encoded U+FFFD (EF BF BD) sequences in bytes; they cannot overlap. */
export function countEncodedReplacements(bytes: Buffer): number {
  let n = 0;
  for (let i = bytes.indexOf(ENCODED_REPLACEMENT); i !== -1; i = bytes.indexOf(ENCODED_REPLACEMENT, i + 3)) n++;
  return n;
}

/** Decodes complete units (whole lines) one at a time. */
export class Utf8LineDecoder {
  private readonly decoder = new TextDecoder('utf-8', { fatal: false, ignoreBOM: true });
  /** Invalid sequences replaced so far. */
  replaced = 0;

  decode(bytes: Buffer): string {
    const text = this.decoder.decode(bytes);
    if (text.indexOf(REPLACEMENT_CHAR) !== -1) {
      this.replaced += countReplacementChars(text) - countEncodedReplacements(bytes);
    }
    return text;
  }
}

/** Decodes a byte stream chunk by chunk; a character split across chunks is decoded whole. */
export class Utf8StreamDecoder {
  private readonly decoder = new TextDecoder('utf-8', { fatal: false, ignoreBOM: true });
  /** Last (up to) two bytes seen, to find an EF BF BD split across chunks. */
  private tail: Buffer = Buffer.alloc(0);
  /** U+FFFD emitted minus EF BF BD read; equals the replacements once end() has been called. */
  private balance = 0;

  /** Invalid sequences replaced; exact after end(). */
  get replaced(): number {
    return this.balance;
  }

  decode(chunk: Buffer): string {
    if (chunk.length === 0) return '';
    let encoded = countEncodedReplacements(chunk);
    if (this.tail.length > 0) {
      const joined = Buffer.concat([this.tail, chunk.subarray(0, 2)]);
      for (let i = 0; i < this.tail.length; i++) {
        if (joined[i] === 0xef && joined[i + 1] === 0xbf && joined[i + 2] === 0xbd) encoded++;
      }
    }
    this.tail =
      chunk.length >= 2 ? Buffer.from(chunk.subarray(chunk.length - 2)) : Buffer.concat([this.tail, chunk]).subarray(-2);
    const text = this.decoder.decode(chunk, { stream: true });
    this.balance += countReplacementChars(text) - encoded;
    return text;
  }

  /** Flushes a truncated character at the end of the input (it becomes one U+FFFD). */
  end(): string {
    const text = this.decoder.decode();
    this.balance += countReplacementChars(text);
    return text;
  }
}
