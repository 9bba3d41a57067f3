/**
 * The token rule of kindred (docs/tokenize.md states it in words; keep the two in step).
 *
 * A token character is a Unicode letter (\p{L}), combining mark (\p{M}) or decimal digit (\p{Nd}).
 * A token is a maximal run of token characters, where a single joiner between two token
 * characters stays inside the token: an apostrophe (' or U+2019) or a hyphen (-) anywhere, and a
 * full stop or comma only between two digits. Everything else separates tokens.
 */

const TOKEN_CHAR = String.raw`[\p{L}\p{M}\p{Nd}]`;
const JOINER = String.raw`(?:['\u2019\-]|(?<=\p{Nd})[.,](?=\p{Nd}))`;

/** The token rule as a regular-expression source (for the `u` flag). */
export const TOKEN_PATTERN = `${TOKEN_CHAR}+(?:${JOINER}${TOKEN_CHAR}+)*`;

/** A global, Unicode-aware matcher for the token rule. Clone it (matchAll does) before use. */
export const TOKEN_REGEXP = new RegExp(TOKEN_PATTERN, 'gu');

/** A number is a token with no letter and no mark: digits and joiners only. */
const NUMBER_REGEXP = /^[\p{Nd}'\u2019.,\-]+$/u;

/** True when a token (as matched by TOKEN_REGEXP) is a number. */
export function isNumberToken(token: string): boolean {
  const c = token.charCodeAt(0);
  // Tokens never start with a joiner; an ASCII first character that is not a digit is a letter.
  if (c < 0x80 && (c < 0x30 || c > 0x39)) return false;
  return NUMBER_REGEXP.test(token);
}

/** The typographic apostrophe U+2019, written as the ASCII apostrophe inside tokens. */
const TYPOGRAPHIC_APOSTROPHE = /\u2019/g;

/** The text normalisation applied before matching: Unicode NFC, then U+2019 -> U+0027. */
export function normalizeText(text: string): string {
  const nfc = text.normalize('NFC');
  return nfc.indexOf('\u2019') === -1 ? nfc : nfc.replace(TYPOGRAPHIC_APOSTROPHE, "'");
}

/** True when s has fewer than `min` code points (UTF-16 surrogate pairs count once). */
export function shorterThan(s: string, min: number): boolean {
  if (s.length < min) return true;
  if (s.length >= 2 * min) return false;
  let codePoints = 0;
  for (let i = 0; i < s.length; i++) {
    const c = s.charCodeAt(i);
    if (c < 0xdc00 || c > 0xdfff) codePoints++; // count all but low surrogates
  }
  return codePoints < min;
}
