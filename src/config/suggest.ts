/** Levenshtein edit distance (insertions, deletions, substitutions each cost 1), two-row dynamic programme. */
export function editDistance(a: string, b: string): number {
  let prev = new Uint32Array(b.length + 1);
  let curr = new Uint32Array(b.length + 1);
  for (let j = 0; j <= b.length; j++) prev[j] = j;
  for (let i = 1; i <= a.length; i++) {
    curr[0] = i;
    for (let j = 1; j <= b.length; j++) {
      const substitution = prev[j - 1] + (a.charCodeAt(i - 1) === b.charCodeAt(j - 1) ? 0 : 1);
      curr[j] = Math.min(prev[j] + 1, curr[j - 1] + 1, substitution);
    }
    [prev, curr] = [curr, prev];
  }
  return prev[b.length];
}

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
