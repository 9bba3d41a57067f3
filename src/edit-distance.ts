/**
 * Optimal string alignment distance: insertions, deletions, substitutions and transpositions of adjacent
 * characters each cost 1 (Damerau 1964, "A technique for computer detection and correction of spelling
 * errors", restricted so no substring is edited twice), over UTF-16 code units, with an early exit past `limit`.
 */
export function editDistance(a: string, b: string, limit = Infinity): number {
  if (Math.abs(a.length - b.length) > limit) return limit + 1;
  let before = new Uint32Array(b.length + 1);
  let prev = new Uint32Array(b.length + 1);
  let cur = new Uint32Array(b.length + 1);
  for (let j = 0; j <= b.length; j++) prev[j] = j;
  for (let i = 1; i <= a.length; i++) {
    cur[0] = i;
    let rowMin = cur[0];
    const ai = a.charCodeAt(i - 1);
    for (let j = 1; j <= b.length; j++) {
      const bj = b.charCodeAt(j - 1);
      let d = Math.min(prev[j - 1] + (ai === bj ? 0 : 1), prev[j] + 1, cur[j - 1] + 1);
      if (i > 1 && j > 1 && ai === b.charCodeAt(j - 2) && a.charCodeAt(i - 2) === bj) d = Math.min(d, before[j - 2] + 1);
      cur[j] = d;
      if (d < rowMin) rowMin = d;
    }
    if (rowMin > limit) return limit + 1;
    [before, prev, cur] = [prev, cur, before];
  }
  return prev[b.length];
}

/** The terms closest to `term` by edit distance (at most `limit` edits), nearest first, ties by position. */
export function closestTerms(term: string, terms: readonly string[], count = 5, limit = 3): string[] {
  const found: { id: number; d: number }[] = [];
  for (let id = 0; id < terms.length; id++) {
    const d = editDistance(term, terms[id], limit);
    if (d <= limit) found.push({ id, d });
  }
  found.sort((x, y) => x.d - y.d || x.id - y.id);
  return found.slice(0, count).map((f) => terms[f.id]);
}
