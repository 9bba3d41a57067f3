/** The fully resolved build configuration. Every key has a value after resolution (defaults applied). */

export type InputFormat = 'auto' | 'text-lines' | 'text-file' | 'jsonl' | 'json-array';
export type BadRecordPolicy = 'fail' | 'skip';
export type NumberPolicy = 'keep' | 'drop' | 'replace';
export type ContextType = 'window' | 'document';
export type WindowDirection = 'symmetric' | 'left' | 'right';
export type WindowWeighting = 'uniform' | 'harmonic';
export type WeightingScheme = 'ppmi' | 'pmi' | 'observed-expected' | 'ttest' | 'log-count' | 'tfidf';
export type LogBase = '2' | 'e' | '10';
export type TfForm = 'raw' | 'log';
export type IdfForm = 'plain' | 'smooth';
export type Normalization = 'l2' | 'l1' | 'none';
export type ValueType = 'float32' | 'float64';

export interface InputConfig {
  /** Files, directories or glob patterns, relative to the config file's folder. */
  paths: string[];
  format: InputFormat;
  /** Dotted path of the text field in JSON records. */
  textField: string;
  /** Dotted path of the id field in JSON records, or null. */
  idField: string | null;
  onBadRecord: BadRecordPolicy;
}

export interface TokenizeConfig {
  lowercase: boolean;
  minLength: number;
  numbers: NumberPolicy;
  numberPlaceholder: string;
  /** A file with one stopword per line, relative to the config file's folder, or null. */
  stopwords: string | null;
}

export interface VocabularyConfig {
  minCount: number;
  /** 0 means no limit. */
  maxSize: number;
  minDocFreq: number;
}

export interface ContextsConfig {
  type: ContextType;
  window: number;
  direction: WindowDirection;
  weighting: WindowWeighting;
}

export interface WeightingConfig {
  scheme: WeightingScheme;
  /** Context-distribution smoothing exponent for PPMI/PMI (1 = none). */
  smoothing: number;
  /** PPMI shift k: log(k) is subtracted before clipping at zero (1 = none). */
  shift: number;
  logBase: LogBase;
  tf: TfForm;
  idf: IdfForm;
}

export interface OutputConfig {
  /** Number of row-partitioned shards. */
  parts: number;
  valueType: ValueType;
}

export type NeighborMeasure = 'euclidean' | 'manhattan' | 'cosine' | 'kl' | 'js' | 'jaccard' | 'dice' | 'overlap' | 'matching';
export type NeighborSource = 'rows' | 'vectors';

export interface VectorsConfig {
  enabled: boolean;
  /** Leading singular values kept: the length of each term vector. */
  dimensions: number;
  /** Eigenvalue weighting exponent p: vectors = U·Σ^p. */
  exponent: number;
  oversampling: number;
  powerIterations: number;
  seed: number;
}

export interface NeighborsConfig {
  enabled: boolean;
  measure: NeighborMeasure;
  k: number;
  /** The this-many most frequent terms get a list; 0 means every term. */
  terms: number;
  source: NeighborSource;
}

export interface KindredConfig {
  input: InputConfig;
  tokenize: TokenizeConfig;
  vocabulary: VocabularyConfig;
  contexts: ContextsConfig;
  weighting: WeightingConfig;
  normalize: Normalization;
  output: OutputConfig;
  vectors: VectorsConfig;
  neighbors: NeighborsConfig;
  /**
   * Memory budget of the counting stages in MiB: the vocabulary's term tables take at most half of it, a chunk of
   * the corpus being counted a quarter, the gathered occurrences another quarter (docs/config.md).
   */
  memoryMiB: number;
  /** Worker threads of the counting stage; 0 means one per CPU core. Outputs do not depend on it. */
  workers: number;
}
