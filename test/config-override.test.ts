import { describe, expect, it } from 'vitest';
import { applyOverride, validateConfig } from '../src/config/index.js';
import { isKindredError } from '../src/errors.js';

function messageOf(f: () => unknown): string {
  try {
    f();
  } catch (e) {
    if (!isKindredError(e)) throw e;
    return e.message;
  }
  throw new Error('expected a KindredError');
}

const base = (): Record<string, unknown> => ({ input: { paths: ['a.txt'] }, contexts: { type: 'window', window: 5 } });

describe('applyOverride (--set key=value)', () => {
  it('sets a nested number, keeping sibling keys', () => {
    const raw = base();
    applyOverride(raw, 'contexts.window=3');
    expect(raw.contexts).toEqual({ type: 'window', window: 3 });
  });

  it('sets an enum string given without quotes, and with JSON quotes', () => {
    const raw = base();
    applyOverride(raw, 'weighting.scheme=pmi');
    expect(raw.weighting).toEqual({ scheme: 'pmi' });
    applyOverride(raw, 'weighting.scheme="observed-expected"');
    expect(raw.weighting).toEqual({ scheme: 'observed-expected' });
  });

  it('sets an array from JSON', () => {
    const raw = base();
    applyOverride(raw, 'input.paths=["a","b"]');
    expect(raw.input).toEqual({ paths: ['a', 'b'] });
  });

  it('sets null from JSON, and a string where null was allowed', () => {
    const raw = base();
    applyOverride(raw, 'tokenize.stopwords=null');
    expect(raw.tokenize).toEqual({ stopwords: null });
    applyOverride(raw, 'tokenize.stopwords=lists/stop.txt');
    expect(raw.tokenize).toEqual({ stopwords: 'lists/stop.txt' });
  });

  it('falls back to the plain text when the JSON reading does not fit the key', () => {
    const raw = base();
    applyOverride(raw, 'weighting.logBase=2'); // JSON 2 is a number, the key wants the string "2"
    applyOverride(raw, 'input.textField=null'); // textField cannot be null, so it is the field named "null"
    applyOverride(raw, 'tokenize.numberPlaceholder=123');
    expect(raw.weighting).toEqual({ logBase: '2' });
    expect((raw.input as Record<string, unknown>).textField).toBe('null');
    expect((raw.tokenize as Record<string, unknown>).numberPlaceholder).toBe('123');
  });

  it('keeps everything after the first "=" as the value', () => {
    const raw = base();
    applyOverride(raw, 'input.textField=a=b');
    expect((raw.input as Record<string, unknown>).textField).toBe('a=b');
  });

  it('creates a missing section and sets top-level keys', () => {
    const raw: Record<string, unknown> = {};
    applyOverride(raw, 'output.parts=16');
    applyOverride(raw, 'normalize=none');
    applyOverride(raw, 'memoryMiB=64');
    expect(raw).toEqual({ output: { parts: 16 }, normalize: 'none', memoryMiB: 64 });
  });

  it('replaces a whole section with a JSON object; missing keys then take defaults', () => {
    const raw = base();
    applyOverride(raw, 'contexts={"type":"document"}');
    expect(raw.contexts).toEqual({ type: 'document' });
    expect(validateConfig(raw, 'x.json').contexts.window).toBe(5);
  });

  it('a later assignment wins over an earlier one', () => {
    const raw = base();
    applyOverride(raw, 'contexts.window=3');
    applyOverride(raw, 'contexts.window=7');
    expect((raw.contexts as Record<string, unknown>).window).toBe(7);
  });

  const errors: Array<[string, string]> = [
    ['contexts.window=abc', '--set contexts.window=abc: contexts.window: "abc" is not an integer'],
    ['contexts.window=0', '--set contexts.window=0: contexts.window: 0 is below the minimum 1'],
    ['contexts.window=', '--set contexts.window=: contexts.window: "" is not an integer'],
    ['weighting.scheme=ppmi2', '--set weighting.scheme=ppmi2: weighting.scheme: "ppmi2" is not one of ppmi, pmi, observed-expected, ttest, log-count, tfidf'],
    ['weighting.logBase=3', '--set weighting.logBase=3: weighting.logBase: 3 is not one of 2, e, 10'],
    ['input.paths=[]', '--set input.paths=[]: input.paths: [] must have at least 1 item'],
    ['input.paths=a.txt', '--set input.paths=a.txt: input.paths: "a.txt" is not an array'],
    ['contexts={"windw":3}', '--set contexts={"windw":3}: unknown key "contexts.windw" (allowed: type, window, direction, weighting), did you mean "window"?'],
    ['contexts.windw=3', '--set contexts.windw=3: unknown key "contexts.windw" (allowed: type, window, direction, weighting), did you mean "window"?'],
    ['window=3', '--set window=3: unknown key "window" (allowed: $schema, input, tokenize, vocabulary, contexts, weighting, normalize, output, vectors, neighbors, memoryMiB, workers), did you mean "contexts.window"?'],
    ['__proto__.x=1', '--set __proto__.x=1: unknown key "__proto__" (allowed: $schema, input, tokenize, vocabulary, contexts, weighting, normalize, output, vectors, neighbors, memoryMiB, workers)'],
    ['contexts.window.size=3', '--set contexts.window.size=3: contexts.window has no keys below it (it is an integer)'],
    ['contexts.window', '--set contexts.window: expected key=value, for example contexts.window=3'],
    ['tokenize.stopwords.x=1', '--set tokenize.stopwords.x=1: tokenize.stopwords has no keys below it (it is a string or null)'],
    ['normalize.x=1', '--set normalize.x=1: normalize has no keys below it (it is one of l2, l1, none)'],
    ['=3', '--set =3: "" is not a dotted key path such as contexts.window'],
    ['contexts..window=3', '--set contexts..window=3: "contexts..window" is not a dotted key path such as contexts.window'],
  ];
  for (const [assignment, expected] of errors) {
    it(`rejects ${assignment}`, () => {
      const raw = base();
      const before = structuredClone(raw);
      expect(messageOf(() => applyOverride(raw, assignment))).toBe(expected);
      expect(raw).toEqual(before); // a rejected assignment changes nothing
    });
  }

  it('refuses to write below a value of the file that is not an object', () => {
    const raw: Record<string, unknown> = { input: { paths: ['a'] }, contexts: 5 };
    expect(messageOf(() => applyOverride(raw, 'contexts.window=3'))).toBe(
      '--set contexts.window=3: cannot set contexts.window: contexts in the config is 5, not an object',
    );
  });

  it('does not pollute Object.prototype', () => {
    const raw = base();
    expect(() => applyOverride(raw, '__proto__={"polluted":1}')).toThrow();
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
  });
});
