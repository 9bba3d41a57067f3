/**
 * Edit distance used for "did you mean" suggestions. Reference values: the textbook pairs for Levenshtein
 * distance (kitten/sitting = 3, flaw/lawn = 2) and for the optimal string alignment variant, where an
 * adjacent transposition costs 1 but CA -> ABC costs 3 (common practice, no source).
 */
import { describe, it, expect } from 'vitest';
import { editDistance, closestTerms } from '../src/edit-distance.js';

describe('editDistance (optimal string alignment)', () => {
  it('matches the textbook values', () => {
    expect(editDistance('kitten', 'sitting')).toBe(3);
    expect(editDistance('flaw', 'lawn')).toBe(2);
    expect(editDistance('', 'abc')).toBe(3);
    expect(editDistance('abc', 'abc')).toBe(0);
    expect(editDistance('tnet', 'tent')).toBe(1);
    expect(editDistance('ca', 'abc')).toBe(3);
  });

  it('is symmetric and exits early past the limit', () => {
    for (const [a, b] of [['receive', 'recieve'], ['shelter', 'shleter'], ['stove', 'burner']]) {
      expect(editDistance(a, b)).toBe(editDistance(b, a));
    }
    expect(editDistance('stove', 'burner', 2)).toBe(3);
  });

  it('suggests the nearest terms first, ties by position', () => {
    expect(closestTerms('tnet', ['the', 'not', 'tent', 'one'])).toEqual(['tent', 'the', 'not', 'one']);
  });
});
