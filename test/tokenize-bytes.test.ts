/**
 * The byte-level tokenizer (src/tokenize/bytes.ts) against the documented rule: the reference tokenizer of
 * src/tokenize/index.ts, itself checked against an independent Python version of docs/tokenize.md
 * (python3 `re` + `unicodedata`) in test/tokenize-reference.test.ts. Property test on seeded random text.
 */
import { describe, it, expect, afterAll } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { createTokenizer } from '../src/tokenize/index.js';
import { createByteTokenizer, scanBytes, NON_ASCII, ASCII_NON_SPACE } from '../src/tokenize/bytes.js';
import type { TokenizeConfig } from '../src/config/types.js';
import { mulberry32 as random } from './helpers/random.js';
import { hashBytes } from '../src/count/term-table.js';


// Pieces chosen to hit every branch of the rule: ASCII letters and digits, joiners in and out of place,
// separators, letters and digits of other scripts, combining marks (NFC composes some), U+2019, characters
// beyond the BMP, format characters, invalid-looking lone surrogates and the replacement character.
const ASCII_PIECES = ['a', 'B', 'z', 'Q', 'e', '0', '7', '9', "'", '-', '.', ',', ' ', '  ', '\t', '_', '!', '/', '@', '--', "''", '3.', '.5', 'Ab', 'THE', 'x1'];
const OTHER_PIECES = ['é', 'e\u0301', '\u2019', 'É', 'İ', 'Σ', 'ς', 'ß', 'ﬁ', 'Привет', '٣', '४', '½', '²', 'Ⅻ', '東京', '😀', '𝒜', '\u00ad', '\u200b', '\u200d', '\ufffd', '\u00a0', '\u3000', '\u0301', 'ǅ'];

function randomText(rnd: () => number, ascii: boolean): string {
  const n = Math.floor(rnd() * 40);
  let s = '';
  for (let i = 0; i < n; i++) {
    const other = !ascii && rnd() < 0.25;
    const pool = other ? OTHER_PIECES : ASCII_PIECES;
    s += pool[Math.floor(rnd() * pool.length)];
  }
  return s;
}

const CONFIGS: TokenizeConfig[] = [
  { lowercase: true, minLength: 1, numbers: 'keep', numberPlaceholder: '<num>', stopwords: null },
  { lowercase: false, minLength: 1, numbers: 'drop', numberPlaceholder: '<num>', stopwords: null },
  { lowercase: true, minLength: 2, numbers: 'replace', numberPlaceholder: '<NUM>', stopwords: 'stop.txt' },
  { lowercase: true, minLength: 3, numbers: 'replace', numberPlaceholder: 'the', stopwords: 'stop.txt' },
];

describe('byte tokenizer gives the tokens of the reference rule (src/tokenize/index.ts)', () => {
  const dir = mkdtempSync(path.join(os.tmpdir(), 'kindred-tokbytes-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));
  writeFileSync(path.join(dir, 'stop.txt'), 'the\n# comment\nab\nÉté\ndon’t\n');
  for (const [c, cfg] of CONFIGS.entries()) {
    it(`random ASCII and Unicode text, config ${c} (${cfg.numbers}, minLength ${cfg.minLength}, lowercase ${cfg.lowercase})`, async () => {
      const reference = await createTokenizer(cfg, dir);
      const bytes = await createByteTokenizer(cfg, dir);
      const rnd = random(1000 + c);
      const decoder = new TextDecoder();
      for (let trial = 0; trial < 3000; trial++) {
        const ascii = trial % 2 === 0;
        const text = randomText(rnd, ascii);
        const expected: string[] = [];
        reference.tokenize(text, (t) => expected.push(t));
        const viaText: string[] = [];
        bytes.tokenizeText(text, (b, s, e) => viaText.push(decoder.decode(b.subarray(s, e))));
        expect(viaText, JSON.stringify(text)).toEqual(expected);
        const buf = Buffer.from(`xx${text}yy`, 'utf8');
        const scan = scanBytes(buf, 2, buf.length - 2);
        expect((scan & NON_ASCII) !== 0).toBe(/[^\x00-\x7f]/.test(text));
        if ((scan & NON_ASCII) === 0) {
          expect((scan & ASCII_NON_SPACE) !== 0).toBe(/\S/.test(text));
          const viaBytes: string[] = [];
          let badHashes = 0;
          bytes.tokenizeAscii(buf, 2, buf.length - 2, (b, s, e, h) => {
            viaBytes.push(decoder.decode(b.subarray(s, e)));
            // the hash fused into the scan is FNV-1a of the emitted bytes (hashBytes: common practice, no source)
            if (h !== hashBytes(b, s, e)) badHashes++;
          });
          expect(viaBytes, JSON.stringify(text)).toEqual(expected);
          expect(badHashes, JSON.stringify(text)).toBe(0);
        }
      }
    });
  }

  it('worked examples of docs/tokenize.md (from the doc\'s table)', async () => {
    const cfg = CONFIGS[0];
    const bytes = await createByteTokenizer(cfg, dir);
    const tokens = (text: string): string[] => {
      const out: string[] = [];
      bytes.tokenizeText(text, (b, s, e) => out.push(Buffer.from(b.subarray(s, e)).toString('utf8')));
      return out;
    };
    expect(tokens('Don’t e-mail the state-of-the-art café')).toEqual(["don't", 'e-mail', 'the', 'state-of-the-art', 'café']);
    expect(tokens("well--known 'tis")).toEqual(['well', 'known', 'tis']);
    expect(tokens('3.14 1,000,000 v1.2 U.S.A.')).toEqual(['3.14', '1,000,000', 'v1.2', 'u', 's', 'a']);
  });
});
