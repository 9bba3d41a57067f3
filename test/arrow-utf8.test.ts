/**
 * utf8Data (src/store/arrow-sink.ts) encodes all strings at once: its bytes and offsets must be exactly those of
 * encoding each string alone with the WHATWG TextEncoder (the reference, Node's built-in), also for strings
 * of other scripts, astral characters, and lone surrogates that would pair up across a join.
 */
import { describe, it, expect } from 'vitest';
import { utf8Data } from '../src/store/arrow-sink.js';
import { mulberry32 } from './helpers/random.js';

function reference(strings: string[]): { offsets: number[]; bytes: number[] } {
  const encoder = new TextEncoder();
  const offsets = [0];
  const bytes: number[] = [];
  for (const s of strings) {
    bytes.push(...encoder.encode(s));
    offsets.push(bytes.length);
  }
  return { offsets, bytes };
}

function check(strings: string[]): void {
  const data = utf8Data(strings);
  const ref = reference(strings);
  expect([...data.valueOffsets]).toEqual(ref.offsets);
  expect([...data.values.subarray(0, ref.bytes.length)]).toEqual(ref.bytes);
  expect(data.length).toBe(strings.length);
}

describe('utf8Data', () => {
  it('ASCII, other scripts and astral characters', () => {
    check(['the', '', 'café', 'naïve', 'Ελληνικά', '日本語', '😀x', 'a\u0301']);
  });

  it('lone surrogates are encoded string by string (U+FFFD each), not paired across the join', () => {
    check(['ab\uD83D', '\uDE00cd', '\uDE00', 'x']);
  });

  it('random strings', () => {
    const rand = mulberry32(11);
    const pool = ['a', 'z', ' ', 'é', 'ß', 'Ж', '中', '😀', '\uD800', '\uDFFF', '\u0000'];
    for (let t = 0; t < 50; t++) {
      const strings = Array.from({ length: 1 + Math.floor(rand() * 30) }, () => Array.from({ length: Math.floor(rand() * 6) }, () => pool[Math.floor(rand() * pool.length)]).join(''));
      check(strings);
    }
  });
});
