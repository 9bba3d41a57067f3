/**
 * The tokenizer over UTF-8 bytes. Text that is all ASCII takes a fast path that classifies bytes with a
 * table and hands out token bytes without making a string; any other text goes through the reference
 * tokenizer of index.ts (the documented rule) and its tokens are encoded to UTF-8. Both paths give the same
 * tokens (test/tokenize-bytes.test.ts compares them on random Unicode text).
 *
 * Why the ASCII path is exact: NFC leaves ASCII unchanged and U+2019 is not ASCII; the only ASCII token
 * characters are A-Z, a-z (letters) and 0-9 (decimal digits); lowercasing ASCII maps A-Z to a-z; an
 * ASCII token's length in code points is its length in bytes.
 */
import { isAscii } from 'node:buffer';
import path from 'node:path';
import type { NumberPolicy, TokenizeConfig } from '../config/types.js';
import { TermTable, hashBytes } from '../count/term-table.js';
import { createTokenizer, loadStopwords, type Tokenizer } from './index.js';

/**
 * Receives one token as bytes[start, end) and its FNV-1a hash (hashBytes of term-table.ts, computed while the
 * token was scanned); the bytes are only valid during the call.
 */
export type TokenSink = (bytes: Uint8Array, start: number, end: number, hash: number) => void;

/** FNV-1a constants (Fowler, Noll, Vo; common practice, no source), as in hashBytes of term-table.ts. */
const FNV_OFFSET = 0x811c9dc5;
const FNV_PRIME = 0x01000193;

const SEPARATOR = 0;
const LOWER = 1;
const UPPER = 2;
const DIGIT = 3;
/** ' and -: inside a token between any two token characters. */
const JOINER = 4;
/** . and ,: inside a token only between two digits. */
const DIGIT_JOINER = 5;

const CLASS = new Uint8Array(256);
for (let c = 0x61; c <= 0x7a; c++) CLASS[c] = LOWER;
for (let c = 0x41; c <= 0x5a; c++) CLASS[c] = UPPER;
for (let c = 0x30; c <= 0x39; c++) CLASS[c] = DIGIT;
CLASS[0x27] = JOINER;
CLASS[0x2d] = JOINER;
CLASS[0x2e] = DIGIT_JOINER;
CLASS[0x2c] = DIGIT_JOINER;

/** Bytes that JavaScript's \s matches among ASCII: tab, line feed, vertical tab, form feed, carriage return, space. */
const ASCII_SPACE = new Uint8Array(128);
for (const c of [0x09, 0x0a, 0x0b, 0x0c, 0x0d, 0x20]) ASCII_SPACE[c] = 1;

/** What a scan of a document's bytes found: bit 1 = a byte ≥ 0x80, bit 2 = an ASCII byte that is not white space. */
export const NON_ASCII = 1;
export const ASCII_NON_SPACE = 2;

/** One pass over bytes[start, end): whether it holds non-ASCII bytes and whether it holds an ASCII non-space byte. */
export function scanBytes(bytes: Uint8Array, start: number, end: number): number {
  if (isAscii(bytes.subarray(start, end))) {
    // the native check covers the bytes; a document's first non-space byte is usually its first byte
    for (let i = start; i < end; i++) if (ASCII_SPACE[bytes[i]] === 0) return ASCII_NON_SPACE;
    return 0;
  }
  let found = 0;
  for (let i = start; i < end; i++) {
    const b = bytes[i];
    if (b >= 0x80) return found | NON_ASCII | scanRest(bytes, i + 1, end, found);
    if (ASCII_SPACE[b] === 0) found = ASCII_NON_SPACE;
  }
  return found;
}

function scanRest(bytes: Uint8Array, start: number, end: number, found: number): number {
  if (found !== 0) return found;
  for (let i = start; i < end; i++) {
    const b = bytes[i];
    if (b < 0x80 && ASCII_SPACE[b] === 0) return ASCII_NON_SPACE;
  }
  return 0;
}

export class ByteTokenizer {
  private lowered = Buffer.allocUnsafe(256);
  private encoded = Buffer.allocUnsafe(1024);
  private readonly placeholder: Buffer;
  private readonly placeholderHash: number;

  constructor(
    private readonly lowercase: boolean,
    private readonly minLength: number,
    private readonly numbers: NumberPolicy,
    numberPlaceholder: string,
    /** Stopwords as UTF-8 bytes, already normalised like tokens; null for none. */
    private readonly stopwords: TermTable | null,
    /** The reference tokenizer, for text that is not all ASCII. */
    private readonly reference: Tokenizer,
  ) {
    this.placeholder = Buffer.from(numberPlaceholder, 'utf8');
    this.placeholderHash = hashBytes(this.placeholder, 0, this.placeholder.length);
  }

  /** Tokens of ASCII bytes[start, end) (the caller has checked with scanBytes that no byte is ≥ 0x80). */
  tokenizeAscii(bytes: Uint8Array, start: number, end: number, emit: TokenSink): void {
    const { lowercase, minLength, numbers, stopwords } = this;
    const upperShift = lowercase ? 32 : 0;
    let i = start;
    while (i < end) {
      // b is bytes[i], c its class
      let b = bytes[i];
      let c = CLASS[b];
      if (c === SEPARATOR || c >= JOINER) {
        i++;
        continue;
      }
      const s = i;
      let letters = false;
      let upper = false;
      // FNV-1a of the token's bytes as emitted (lowercased when asked), computed while scanning
      let h = FNV_OFFSET;
      for (;;) {
        if (c === LOWER) {
          // the common case, a run of lowercase letters, in a loop of its own (about a fifth faster)
          letters = true;
          do {
            h = Math.imul(h ^ b, FNV_PRIME);
            if (++i >= end) break;
            b = bytes[i];
            c = CLASS[b];
          } while (c === LOWER);
          if (i >= end) break;
        } else {
          if (c === UPPER) {
            letters = true;
            upper = true;
            h = Math.imul(h ^ (b + upperShift), FNV_PRIME);
          } else h = Math.imul(h ^ b, FNV_PRIME);
          if (++i >= end) break;
          b = bytes[i];
          c = CLASS[b];
        }
        if (c === SEPARATOR) break;
        if (c < JOINER) continue;
        // a joiner stays inside only between two token characters; . and , only between two digits
        if (i + 1 >= end) break;
        const next = CLASS[bytes[i + 1]];
        if (next === SEPARATOR || next >= JOINER) break;
        if (c === DIGIT_JOINER && (next !== DIGIT || CLASS[bytes[i - 1]] !== DIGIT)) break;
        h = Math.imul(h ^ b, FNV_PRIME);
        i++;
        b = bytes[i];
        c = next;
      }
      h >>>= 0;
      if (!letters && numbers !== 'keep') {
        if (numbers === 'replace') emit(this.placeholder, 0, this.placeholder.length, this.placeholderHash);
        continue;
      }
      const len = i - s;
      if (len < minLength) continue;
      let out: Uint8Array = bytes;
      let from = s;
      if (lowercase && upper) {
        if (this.lowered.length < len) this.lowered = Buffer.allocUnsafe(len * 2);
        out = this.lowered;
        from = 0;
        for (let k = 0; k < len; k++) {
          const b = bytes[s + k];
          out[k] = CLASS[b] === UPPER ? b + 32 : b;
        }
      }
      if (stopwords !== null && stopwords.findHashed(out, from, from + len, h) >= 0) continue;
      emit(out, from, from + len, h);
    }
  }

  /** Tokens of a document given as text: the ASCII path when it is all ASCII, else the reference tokenizer. */
  tokenizeText(text: string, emit: TokenSink): void {
    if (this.encoded.length < text.length * 3) this.encoded = Buffer.allocUnsafe(text.length * 3 + 1024);
    const n = this.encoded.write(text, 0, 'utf8');
    if (n === text.length) {
      this.tokenizeAscii(this.encoded, 0, n, emit);
      return;
    }
    this.reference.tokenize(text, (token) => {
      if (this.lowered.length < token.length * 3) this.lowered = Buffer.allocUnsafe(token.length * 3 + 256);
      const m = this.lowered.write(token, 0, 'utf8');
      emit(this.lowered, 0, m, hashBytes(this.lowered, 0, m));
    });
  }
}

/** Builds the byte tokenizer for a `tokenize` config section (stopword paths relative to baseDir). */
export async function createByteTokenizer(cfg: TokenizeConfig, baseDir: string): Promise<ByteTokenizer> {
  const reference = await createTokenizer(cfg, baseDir);
  let stopwords: TermTable | null = null;
  if (cfg.stopwords !== null) {
    stopwords = new TermTable();
    for (const w of await loadStopwords(path.resolve(baseDir, cfg.stopwords), cfg.lowercase)) {
      const b = Buffer.from(w, 'utf8');
      stopwords.intern(b, 0, b.length);
    }
  }
  return new ByteTokenizer(cfg.lowercase, cfg.minLength, cfg.numbers, cfg.numberPlaceholder, stopwords, reference);
}
