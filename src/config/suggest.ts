import { editDistance } from '../edit-distance.js';

/**
 * The candidate closest to `word` (case-insensitive), or undefined when none is close enough to be a
 * plausible typo: at most one edit per three characters, and at least one edit allowed. Ties go to the earlier candidate.
 */
export function closestMatch(word: string, candidates: readonly string[]): string | undefined {
  const w = word.toLowerCase();
  const limit = Math.max(1, Math.floor(w.length / 3));
  let best: string | undefined;
  let bestDistance = Infinity;
  for (const c of candidates) {
    const d = editDistance(w, c.toLowerCase());
    if (d <= limit && d < bestDistance) {
      best = c;
      bestDistance = d;
    }
  }
  return best;
}
