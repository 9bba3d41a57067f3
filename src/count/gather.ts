/**
 * Gathering a group of rows' occurrences out of a loaded chunk (chunks.ts) into one shared buffer, grouped by
 * row in corpus order (a counting sort from the chunk's term counts per slice): for window contexts each
 * occurrence's window, for document contexts its document. Each slice of the chunk is scanned on its own
 * thread and writes its own share of the buffer (groupLayout); the count tasks (rows-map.ts) then read each
 * row's occurrences slice by slice, that is in corpus order. Scanning the chunk in order and writing each
 * window once costs far less than reading every occurrence's window where it lies in the chunk (a cache miss
 * apiece, docs/performance.md).
 */
import type { ContextsConfig } from '../config/types.js';
import { documentEndIn, sharedInt32, type Chunk, type ChunkIds, type ChunkSlice, type SliceCounts } from './chunks.js';

/** Entries gathered per occurrence: a window's ids (left side first), or one document number. */
export function gatherWidth(contexts: ContextsConfig): { left: number; right: number; width: number } {
  if (contexts.type === 'document') return { left: 0, right: 0, width: 1 };
  const left = contexts.direction !== 'right' ? contexts.window : 0;
  const right = contexts.direction !== 'left' ? contexts.window : 0;
  return { left, right, width: left + right };
}

/** Occurrences the gathering buffer holds (at least one). */
export function gatherCapacity(buffer: ChunkIds, contexts: ContextsConfig): number {
  return Math.max(1, Math.floor(buffer.length / gatherWidth(contexts).width));
}

/** Consecutive rows [first, end) gathered at once; `fits`: false for a lone row with more occurrences than the buffer holds. */
export interface RowGroup {
  first: number;
  end: number;
  fits: boolean;
}

/** Rows [0, nRows) cut into groups whose occurrences (rowStart: a chunk's) fit `capacity`; a row that does not is a group alone. */
export function planGroups(rowStart: Int32Array, nRows: number, capacity: number): RowGroup[] {
  const groups: RowGroup[] = [];
  let first = 0;
  while (first < nRows) {
    let end = first + 1;
    while (end < nRows && rowStart[end + 1] - rowStart[first] <= capacity) end++;
    groups.push({ first, end, fits: rowStart[end] - rowStart[first] <= capacity });
    first = end;
  }
  return groups;
}

/**
 * Where a group's occurrences lie in the buffer: slice after slice (threads gathering different slices never
 * write to the same cache lines), row after row within a slice. Entry i * (span + 1) + k is the first
 * occurrence (an index in occurrences, not entries) of row first + k gathered from slice i, and entry
 * i * (span + 1) + span the end of slice i's share; span = end - first. Shared, for the count tasks.
 */
export function groupLayout(group: RowGroup, counted: SliceCounts[]): Int32Array {
  const span = group.end - group.first;
  const starts = sharedInt32(counted.length * (span + 1));
  let at = 0;
  for (const [i, { counts }] of counted.entries()) {
    for (let k = 0; k < span; k++) {
      starts[i * (span + 1) + k] = at;
      at += counts[group.first + k];
    }
    starts[i * (span + 1) + span] = at;
  }
  return starts;
}

/** One slice's share of gathering a group: where in the buffer each of the group's rows starts for it. */
export interface GatherTask {
  slice: ChunkSlice;
  first: number;
  end: number;
  /** Per row of the group: the first buffer entry this slice writes. */
  offsets: Int32Array;
  /** Corpus-wide number of the document at the slice's start (document contexts). */
  document: number;
}

/** The gathering tasks of a group, one per slice (slices and their counts in corpus order, as the chunk was loaded). */
export function gatherTasks(chunk: Chunk, slices: ChunkSlice[], counted: SliceCounts[], group: RowGroup, layout: Int32Array, width: number): GatherTask[] {
  const { first, end } = group;
  const span = end - first;
  let document = chunk.firstDocument;
  return slices.map((slice, i) => {
    const offsets = new Int32Array(span);
    for (let k = 0; k < span; k++) offsets[k] = layout[i * (span + 1) + k] * width;
    const task = { slice, first, end, offsets, document };
    document += counted[i].ends;
    return task;
  });
}

/**
 * Writes the windows of the own tokens in [from, to) of rows [first, end) into buf at each row's offset: per
 * occurrence `left` ids leftwards from distance 1, then `right` ids rightwards, out-of-vocabulary codes and
 * document ends included.
 */
function gatherWindows(ids: ChunkIds, from: number, to: number, first: number, end: number, offsets: Int32Array, buf: ChunkIds, left: number, right: number): void {
  const span = end - first;
  for (let p = from; p < to; p++) {
    const t = ids[p] - first;
    if (t >>> 0 < span) {
      let o = offsets[t];
      for (let d = 1; d <= left; d++) buf[o++] = ids[p - d];
      for (let d = 1; d <= right; d++) buf[o++] = ids[p + d];
      offsets[t] = o;
    }
  }
}

/** Writes the documents (corpus-wide numbers) of the own tokens in [from, to) of rows [first, end); `document`: the one at `from`. */
function gatherDocuments(ids: ChunkIds, from: number, to: number, first: number, end: number, offsets: Int32Array, buf: ChunkIds, document: number): void {
  const span = end - first;
  const documentEnd = documentEndIn(ids);
  let doc = document;
  for (let p = from; p < to; p++) {
    const id = ids[p];
    if (id === documentEnd) doc++;
    else if ((id - first) >>> 0 < span) buf[offsets[id - first]++] = doc;
  }
}

/** Where a lone row's gathering stopped: the next position to scan, the occurrences gathered, the document there. */
export interface Piece {
  at: number;
  gathered: number;
  document: number;
}

/** Gathers the occurrences of row `row` among the own tokens from position `from` on, until buf is full (a lone row). */
export function gatherRow(chunk: Chunk, contexts: ContextsConfig, row: number, from: number, document: number, buf: ChunkIds): Piece {
  const { ids, ownEnd } = chunk;
  const { left, right, width } = gatherWidth(contexts);
  const documentEnd = documentEndIn(ids);
  const limit = buf.length - width;
  if (limit < 0) throw new Error(`the gathering buffer holds no occurrence (${buf.length} entries, ${width} an occurrence)`);
  let o = 0;
  let p = from;
  let doc = document;
  if (contexts.type === 'document') {
    for (; p < ownEnd && o <= limit; p++) {
      const id = ids[p];
      if (id === documentEnd) doc++;
      else if (id === row) buf[o++] = doc;
    }
  } else {
    for (; p < ownEnd && o <= limit; p++) {
      if (ids[p] === row) {
        for (let d = 1; d <= left; d++) buf[o++] = ids[p - d];
        for (let d = 1; d <= right; d++) buf[o++] = ids[p + d];
      }
    }
  }
  return { at: p, gathered: o / width, document: doc };
}

export interface GatherSetup {
  chunk: Chunk;
  contexts: ContextsConfig;
  /** The shared gathering buffer. */
  buffer: ChunkIds;
}

/** The gathering task, run in a worker thread or the main thread alike: one slice's share of a group. */
export class GatherMapper {
  constructor(private readonly setup: GatherSetup) {}

  async run(task: GatherTask): Promise<null> {
    const { chunk, contexts, buffer } = this.setup;
    const from = Math.max(task.slice.start, chunk.ownStart);
    const to = Math.min(task.slice.end, chunk.ownEnd);
    if (contexts.type === 'document') gatherDocuments(chunk.ids, from, to, task.first, task.end, task.offsets, buffer, task.document);
    else {
      const { left, right } = gatherWidth(contexts);
      gatherWindows(chunk.ids, from, to, task.first, task.end, task.offsets, buffer, left, right);
    }
    return null;
  }

  finish(): Record<string, never> {
    return {};
  }
}
