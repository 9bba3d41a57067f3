/** The tokenizer: the token rule of rule.ts plus the options of the `tokenize` config section. */
import { readFile } from 'node:fs/promises';
import path from 'node:path';
import type { NumberPolicy, TokenizeConfig } from '../config/types.js';
import { KindredError } from '../errors.js';
import { isNumberToken, normalizeText, shorterThan, TOKEN_REGEXP } from './rule.js';

export { TOKEN_PATTERN, isNumberToken, normalizeText } from './rule.js';

export interface Tokenizer {
  /** Calls emit for each token of the text in order. */
  tokenize(text: string, emit: (token: string) => void): void;
}

class RuleTokenizer implements Tokenizer {
  constructor(
    private readonly lowercase: boolean,
    private readonly minLength: number,
    private readonly numbers: NumberPolicy,
    private readonly numberPlaceholder: string,
    private readonly stopwords: ReadonlySet<string> | null,
  ) {}

  tokenize(text: string, emit: (token: string) => void): void {
    const { lowercase, minLength, numbers, numberPlaceholder, stopwords } = this;
    for (const match of normalizeText(text).matchAll(TOKEN_REGEXP)) {
      let token = match[0];
      if (numbers !== 'keep' && isNumberToken(token)) {
        if (numbers === 'replace') emit(numberPlaceholder);
        continue;
      }
      if (lowercase) token = token.toLowerCase();
      if (minLength > 1 && shorterThan(token, minLength)) continue;
      if (stopwords !== null && stopwords.has(token)) continue;
      emit(token);
    }
  }
}

/**
 * A term written the way the tokenizer writes tokens (NFC, ASCII apostrophe, lowercased when
 * configured), for looking up a user's query term in the vocabulary.
 */
export function normalizeTerm(term: string, cfg: Pick<TokenizeConfig, 'lowercase'>): string {
  const t = normalizeText(term.trim());
  return cfg.lowercase ? t.toLowerCase() : t;
}

/** Reads a stopword file: one word per line, `#` starts a comment, blank lines are ignored. */
export async function loadStopwords(file: string, lowercase: boolean): Promise<Set<string>> {
  let content: string;
  try {
    content = await readFile(file, 'utf8');
  } catch (e) {
    const code = (e as NodeJS.ErrnoException | null)?.code;
    if (typeof code !== 'string') throw e;
    throw new KindredError(`tokenize.stopwords: cannot read stopword file "${file}" (${code}); fix the path in the config or set it to null`);
  }
  const words = new Set<string>();
  for (const rawLine of content.split('\n')) {
    const hash = rawLine.indexOf('#');
    const word = (hash === -1 ? rawLine : rawLine.slice(0, hash)).trim();
    if (word === '') continue;
    words.add(normalizeTerm(word, { lowercase }));
  }
  return words;
}

/** Builds the tokenizer for a `tokenize` config section; relative stopword paths are resolved against baseDir. */
export async function createTokenizer(cfg: TokenizeConfig, baseDir: string): Promise<Tokenizer> {
  const stopwords =
    cfg.stopwords === null ? null : await loadStopwords(path.resolve(baseDir, cfg.stopwords), cfg.lowercase);
  return new RuleTokenizer(cfg.lowercase, cfg.minLength, cfg.numbers, cfg.numberPlaceholder, stopwords);
}
