/** Levenshtein distance (Levenshtein 1966, "Binary codes capable of correcting deletions, insertions and reversals"), over code units, with an early exit past `limit`. */
export function editDistance(a: string, b: string, limit = Infinity): number {
  if (Math.abs(a.length - b.length) > limit) return limit + 1;
  let prev = new Uint32Array(b.length + 1);
  let cur = new Uint32Array(b.length + 1);
  for (let j = 0; j <= b.length; j++) prev[j] = j;
  for (let i = 1; i <= a.length; i++) {
    cur[0] = i;
    let rowMin = cur[0];
    for (let j = 1; j <= b.length; j++) {
      const sub = prev[j - 1] + (a.charCodeAt(i - 1) === b.charCodeAt(j - 1) ? 0 : 1);
      cur[j] = Math.min(sub, prev[j] + 1, cur[j - 1] + 1);
      if (cur[j] < rowMin) rowMin = cur[j];
    }
    if (rowMin > limit) return limit + 1;
    [prev, cur] = [cur, prev];
  }
  return prev[b.length];
}

/** The vocabulary terms closest to `term` by edit distance (at most `limit` edits), nearest first, ties by id. */
export function closestTerms(term: string, terms: readonly string[], count = 5, limit = 3): string[] {
  const found: { id: number; d: number }[] = [];
  for (let id = 0; id < terms.length; id++) {
    const d = editDistance(term, terms[id], limit);
    if (d <= limit) found.push({ id, d });
  }
  found.sort((x, y) => x.d - y.d || x.id - y.id);
  return found.slice(0, count).map((f) => terms[f.id]);
}
