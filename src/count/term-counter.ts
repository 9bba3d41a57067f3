import type { VocabularyConfig } from '../config/types.js';
import type { Vocabulary } from '../store/vocab-file.js';

/** Orders strings by Unicode code point (UTF-16 order differs for characters beyond the BMP). */
export function compareCodePoints(a: string, b: string): number {
  const n = Math.min(a.length, b.length);
  for (let i = 0; i < n; i++) {
    const x = a.codePointAt(i)!;
    const y = b.codePointAt(i)!;
    if (x !== y) return x - y;
    if (x > 0xffff) i++;
  }
  return a.length - b.length;
}

/**
 * Counts term occurrences and document frequencies for the vocabulary pass.
 * Terms map to dense indices once; counts live in growable typed arrays.
 */
export class TermCounter {
  private readonly index = new Map<string, number>();
  private readonly termList: string[] = [];
  private counts = new Float64Array(1024);
  private docFreqs = new Uint32Array(1024);
  private lastDoc = new Int32Array(1024).fill(-1);
  tokens = 0;

  get size(): number {
    return this.termList.length;
  }

  add(term: string, doc: number): void {
    let i = this.index.get(term);
    if (i === undefined) {
      i = this.termList.length;
      this.index.set(term, i);
      this.termList.push(term);
      if (i === this.counts.length) this.grow();
    }
    this.counts[i]++;
    if (this.lastDoc[i] !== doc) {
      this.lastDoc[i] = doc;
      this.docFreqs[i]++;
    }
    this.tokens++;
  }

  private grow(): void {
    const n = this.counts.length * 2;
    const counts = new Float64Array(n);
    counts.set(this.counts);
    const docFreqs = new Uint32Array(n);
    docFreqs.set(this.docFreqs);
    const lastDoc = new Int32Array(n).fill(-1);
    lastDoc.set(this.lastDoc);
    this.counts = counts;
    this.docFreqs = docFreqs;
    this.lastDoc = lastDoc;
  }

  /**
   * Keeps terms with count ≥ minCount and document frequency ≥ minDocFreq, orders them by descending
   * count with ties broken by term (code point order) so ids are stable, and cuts at maxSize when set.
   */
  finish(cfg: VocabularyConfig): Vocabulary {
    const kept: number[] = [];
    for (let i = 0; i < this.termList.length; i++) {
      if (this.counts[i] >= cfg.minCount && this.docFreqs[i] >= cfg.minDocFreq) kept.push(i);
    }
    kept.sort((a, b) => this.counts[b] - this.counts[a] || compareCodePoints(this.termList[a], this.termList[b]));
    const size = cfg.maxSize > 0 ? Math.min(cfg.maxSize, kept.length) : kept.length;
    const terms = new Array<string>(size);
    const counts = new Float64Array(size);
    const docFreqs = new Uint32Array(size);
    for (let id = 0; id < size; id++) {
      const i = kept[id];
      terms[id] = this.termList[i];
      counts[id] = this.counts[i];
      docFreqs[id] = this.docFreqs[i];
    }
    return { terms, counts, docFreqs };
  }
}
