import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type { TokenizeConfig } from '../src/config/types.js';
import { KindredError } from '../src/errors.js';
import { createTokenizer, isNumberToken, normalizeTerm } from '../src/tokenize/index.js';
import { repoRoot } from './helpers/python.js';

const BASE: TokenizeConfig = { lowercase: false, minLength: 1, numbers: 'keep', numberPlaceholder: '<num>', stopwords: null };
const tmp = mkdtempSync(path.join(tmpdir(), 'kindred-tokenize-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

async function tokens(text: string, cfg: Partial<TokenizeConfig> = {}): Promise<string[]> {
  const tokenizer = await createTokenizer({ ...BASE, ...cfg }, tmp);
  const out: string[] = [];
  tokenizer.tokenize(text, (t) => out.push(t));
  return out;
}

describe('token rule', () => {
  it('splits on whitespace and punctuation', async () => {
    expect(await tokens('The Orchard Lane shop, open daily; (mostly).')).toEqual(['The', 'Orchard', 'Lane', 'shop', 'open', 'daily', 'mostly']);
  });

  it('keeps one apostrophe between letters, either form, written as ASCII', async () => {
    expect(await tokens("don't won’t rock'n'roll")).toEqual(["don't", "won't", "rock'n'roll"]);
  });

  it('drops apostrophes at the edges of a word and doubled apostrophes', async () => {
    expect(await tokens("'tis the bakers' ''quoted'' a''b")).toEqual(['tis', 'the', 'bakers', 'quoted', 'a', 'b']);
  });

  it('keeps one hyphen between letters or digits', async () => {
    expect(await tokens('e-mail state-of-the-art 24-7 x-1')).toEqual(['e-mail', 'state-of-the-art', '24-7', 'x-1']);
  });

  it('splits on doubled, leading and trailing hyphens and on dashes', async () => {
    expect(await tokens('well--known -leading trailing- a—b a–b')).toEqual(['well', 'known', 'leading', 'trailing', 'a', 'b', 'a', 'b']);
  });

  it('mixes joiners: one joiner at a time', async () => {
    expect(await tokens("a-'b o'-k x-y'z")).toEqual(['a', 'b', 'o', 'k', "x-y'z"]);
  });

  it('keeps a full stop or comma only between two digits', async () => {
    expect(await tokens('3.14 1,000,000 v1.2 U.S.A. 1999.The end. 5, 6')).toEqual([
      '3.14', '1,000,000', 'v1.2', 'U', 'S', 'A', '1999', 'The', 'end', '5', '6',
    ]);
  });

  it('accepts letters of any script, combining marks and any decimal digits', async () => {
    expect(await tokens('Привет мир Ελλάδα हिन्दी ١٢٣ १२ ５６')).toEqual(['Привет', 'мир', 'Ελλάδα', 'हिन्दी', '١٢٣', '१२', '５６']);
  });

  it('treats symbols, emoji, other numerals and format characters as separators', async () => {
    expect(await tokens('a😀b c+d ½ e\u00ADf g\u200Bh Ⅻ x²')).toEqual(['a', 'b', 'c', 'd', 'e', 'f', 'g', 'h', 'x']);
  });

  it('keeps a run of unspaced CJK text as one token', async () => {
    expect(await tokens('東京は日本の首都です。次')).toEqual(['東京は日本の首都です', '次']);
  });

  it('normalizes to NFC before matching', async () => {
    const decomposed = 'cafe\u0301 Ama\u0301lie';
    expect(await tokens(decomposed)).toEqual(['caf\u00e9', 'Am\u00e1lie']);
  });

  it('keeps a combining mark that has no precomposed form inside the token', async () => {
    expect(await tokens('q\u0323\u0307x y')).toEqual(['q\u0323\u0307x', 'y']);
  });

  it('gives no tokens for empty or separator-only text', async () => {
    expect(await tokens('')).toEqual([]);
    expect(await tokens(' \n\t...!?')).toEqual([]);
  });
});

describe('options', () => {
  it('lowercase: locale-independent lowercasing of each token', async () => {
    expect(await tokens('Fulton GROßE ΟΔΟΣ İstanbul', { lowercase: true })).toEqual(['fulton', 'große', 'οδος', 'i\u0307stanbul']);
    expect(await tokens('Fulton', { lowercase: false })).toEqual(['Fulton']);
  });

  it('numbers: keep, drop, replace', async () => {
    const text = 'sold 1,200 units in 2-3 days at 9.99 each 4u';
    expect(await tokens(text, { numbers: 'keep' })).toEqual(['sold', '1,200', 'units', 'in', '2-3', 'days', 'at', '9.99', 'each', '4u']);
    expect(await tokens(text, { numbers: 'drop' })).toEqual(['sold', 'units', 'in', 'days', 'at', 'each', '4u']);
    expect(await tokens(text, { numbers: 'replace', numberPlaceholder: '#n' })).toEqual([
      'sold', '#n', 'units', 'in', '#n', 'days', 'at', '#n', 'each', '4u',
    ]);
  });

  it('numbers: non-ASCII digits are numbers too', async () => {
    expect(await tokens('١٢٣ ５６ १२-३', { numbers: 'drop' })).toEqual([]);
  });

  it('minLength counts code points, and the number placeholder is exempt', async () => {
    expect(await tokens('a an the 𝒜𝒷 𝒜𝒷𝒸 7', { minLength: 3, numbers: 'replace', numberPlaceholder: 'N' })).toEqual(['the', '𝒜𝒷𝒸', 'N']);
    expect(await tokens('a an 7 77', { minLength: 2, numbers: 'keep' })).toEqual(['an', '77']);
  });

  it('stopwords: comments and blank lines ignored, compared after lowercasing', async () => {
    const file = path.join(tmp, 'stop.txt');
    writeFileSync(file, '\uFEFF# shop stopwords\nThe\n\n  and  # trailing comment\nCAFE\u0301\ndon’t\n');
    const cfg = { stopwords: 'stop.txt', lowercase: true };
    expect(await tokens("The tea and THE café don't sell", cfg)).toEqual(['tea', 'sell']);
  });

  it('stopwords without lowercasing match exactly', async () => {
    const file = path.join(tmp, 'stop-case.txt');
    writeFileSync(file, 'The\n');
    expect(await tokens('The the', { stopwords: file, lowercase: false })).toEqual(['the']);
  });

  it('stopwords do not remove the number placeholder', async () => {
    writeFileSync(path.join(tmp, 'stop-num.txt'), 'n\n');
    expect(await tokens('n 12', { stopwords: 'stop-num.txt', numbers: 'replace', numberPlaceholder: 'n' })).toEqual(['n']);
  });

  it('an unreadable stopword file is a KindredError naming the key and the path', async () => {
    const missing = path.join(tmp, 'no-such-stopwords.txt');
    const err = await createTokenizer({ ...BASE, stopwords: 'no-such-stopwords.txt' }, tmp).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(KindredError);
    expect((err as Error).message).toContain('tokenize.stopwords');
    expect((err as Error).message).toContain(missing);
    expect((err as Error).message).not.toContain('\n');
  });
});

describe('helpers', () => {
  it('isNumberToken: digits and joiners only', () => {
    expect(isNumberToken('2024')).toBe(true);
    expect(isNumberToken('1,000.5')).toBe(true);
    expect(isNumberToken('٣')).toBe(true);
    expect(isNumberToken('4u')).toBe(false);
    expect(isNumberToken('é1')).toBe(false);
  });

  it('normalizeTerm writes a query term the way tokens are written', () => {
    expect(normalizeTerm(' Cafe\u0301’s ', { lowercase: true })).toBe("café's");
    expect(normalizeTerm('Cafe', { lowercase: false })).toBe('Cafe');
  });
});

describe('docs/tokenize.md', () => {
  it('every row of the examples table is what the tokenizer gives', async () => {
    const doc = readFileSync(path.join(repoRoot, 'docs', 'tokenize.md'), 'utf8');
    const section = doc.slice(doc.indexOf('## Examples'), doc.indexOf('## Stopword file'));
    const rows = section.split('\n').filter((l) => l.startsWith('| `'));
    expect(rows.length).toBeGreaterThanOrEqual(5);
    for (const row of rows) {
      const [textCell, tokenCell] = row.slice(2, -2).split(' | ');
      const ticked = (cell: string): string[] => [...cell.matchAll(/`([^`]*)`/g)].map((m) => m[1]);
      const replace = textCell.includes('numbers: replace');
      const cfg: Partial<TokenizeConfig> = { lowercase: true, ...(replace ? { numbers: 'replace', numberPlaceholder: '<num>' } : {}) };
      expect(await tokens(ticked(textCell)[0], cfg)).toEqual(ticked(tokenCell));
    }
  });
});
