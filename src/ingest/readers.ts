/** One reader per input format; each streams a file and yields its documents. */
import type { InputConfig, InputFormat } from '../config/types.js';
import { KindredError } from '../errors.js';
import { readContentBytes, oneLine } from './bytes.js';
import { describeJsonSyntaxError, JsonSyntaxError, locateJsonError, readArrayElements } from './json-array.js';
import { MAX_DOCUMENT_BYTES, NUL_LINE_REASON, badTextLine, overlongReason, skipBinaryFile } from './binary.js';
import { LineSplitter, OVERLONG_LINE } from './lines.js';
import { parseFieldPath, recordFields, type FieldPath } from './records.js';
import type { Document, IngestStats } from './types.js';
import { Utf8LineDecoder, Utf8StreamDecoder } from './utf8.js';

export type ConcreteFormat = Exclude<InputFormat, 'auto'>;

/** The format of one file: the configured one, or for 'auto' the extension after removing ".gz". */
export function formatOf(file: string, format: InputFormat): ConcreteFormat {
  if (format !== 'auto') return format;
  const name = file.toLowerCase().replace(/\.gz$/, '');
  if (name.endsWith('.jsonl') || name.endsWith('.ndjson')) return 'jsonl';
  if (name.endsWith('.json')) return 'json-array';
  return 'text-lines';
}

/** What every reader needs: settings, counters and the disk-byte callback. */
export interface ReadContext {
  input: InputConfig;
  stats: IngestStats;
  textPath: FieldPath;
  idPath: FieldPath | null;
  onDiskBytes: (n: number) => void;
  /** The longest line or text file read as one document (MAX_DOCUMENT_BYTES unless a test lowers it). */
  maxDocumentBytes: number;
}

export function makeContext(
  input: InputConfig, stats: IngestStats, onDiskBytes: (n: number) => void, maxDocumentBytes = MAX_DOCUMENT_BYTES,
): ReadContext {
  return {
    input,
    stats,
    textPath: parseFieldPath(input.textField),
    idPath: input.idField === null ? null : parseFieldPath(input.idField),
    onDiskBytes,
    maxDocumentBytes,
  };
}

/** Applies input.onBadRecord to an unusable line (or text-file document). */
function badLine(ctx: ReadContext, where: string, reason: string, what = 'line'): void {
  badTextLine(ctx.input, ctx.stats, where, reason, what);
}

const NON_SPACE = /\S/;

/** Yields, per chunk read, the lines completed by it (the array is reused: consume it before the next step). */
async function* fileLines(file: string, ctx: ReadContext): AsyncGenerator<Buffer[]> {
  const splitter = new LineSplitter(ctx.maxDocumentBytes);
  const lines: Buffer[] = [];
  for await (const chunk of readContentBytes(file, ctx.onDiskBytes)) {
    lines.length = 0;
    splitter.push(chunk, lines);
    if (lines.length > 0) yield lines;
  }
  const last = splitter.end();
  if (last !== null) yield [last];
}

/** text-lines: one document per line; blank lines are skipped. */
export async function* readTextLines(file: string, ctx: ReadContext): AsyncGenerator<Document> {
  if (skipBinaryFile(file, ctx.input, ctx.stats)) return;
  const decoder = new Utf8LineDecoder();
  let lineNumber = 0;
  try {
    for await (const lines of fileLines(file, ctx)) {
      for (const bytes of lines) {
        lineNumber++;
        if (bytes === OVERLONG_LINE) {
          badLine(ctx, `${file}:${lineNumber}`, overlongReason(ctx.maxDocumentBytes));
          continue;
        }
        if (bytes.length === 0) continue;
        if (bytes.indexOf(0) !== -1) {
          badLine(ctx, `${file}:${lineNumber}`, NUL_LINE_REASON);
          continue;
        }
        const text = decoder.decode(bytes);
        if (!NON_SPACE.test(text)) continue;
        ctx.stats.documents++;
        yield { file, line: lineNumber, id: null, text };
      }
    }
  } finally {
    ctx.stats.invalidUtf8Replaced += decoder.replaced;
  }
}

/** text-file: the whole file is one document; a blank file gives none. */
export async function* readTextFile(file: string, ctx: ReadContext): AsyncGenerator<Document> {
  if (skipBinaryFile(file, ctx.input, ctx.stats)) return;
  const decoder = new Utf8StreamDecoder();
  const parts: string[] = [];
  let size = 0;
  for await (const chunk of readContentBytes(file, ctx.onDiskBytes)) {
    size += chunk.length;
    if (size > ctx.maxDocumentBytes) {
      badLine(ctx, file, `${overlongReason(ctx.maxDocumentBytes).replace('lines', 'files')}`, 'document');
      return;
    }
    parts.push(decoder.decode(chunk));
  }
  parts.push(decoder.end());
  ctx.stats.invalidUtf8Replaced += decoder.replaced;
  const text = parts.join('');
  const nul = text.indexOf('\0');
  if (nul !== -1) {
    // past the sniffed head (a NUL there makes the file binary): the file is the document, so it goes
    badLine(ctx, `${file}:${lineOf(text, nul)}`, NUL_LINE_REASON, 'document');
    return;
  }
  if (!NON_SPACE.test(text)) return;
  ctx.stats.documents++;
  yield { file, line: 1, id: null, text };
}

/** The 1-based line of character `index` in text. */
function lineOf(text: string, index: number): number {
  let line = 1;
  for (let i = text.indexOf('\n'); i !== -1 && i < index; i = text.indexOf('\n', i + 1)) line++;
  return line;
}

/** Applies input.onBadRecord to an unusable record: throws under 'fail', counts under 'skip'. */
function badRecord(ctx: ReadContext, where: string, reason: string): void {
  if (ctx.input.onBadRecord === 'fail') {
    throw new KindredError(
      `${where}: invalid JSON record (${oneLine(reason)}); fix the record or set input.onBadRecord to "skip"`,
    );
  }
  ctx.stats.badRecordsSkipped++;
}

/** jsonl: one JSON object per line; blank lines are skipped. */
export async function* readJsonLines(file: string, ctx: ReadContext): AsyncGenerator<Document> {
  if (skipBinaryFile(file, ctx.input, ctx.stats)) return;
  const { input } = ctx;
  const decoder = new Utf8LineDecoder();
  let lineNumber = 0;
  try {
    for await (const lines of fileLines(file, ctx)) {
      for (const bytes of lines) {
        lineNumber++;
        if (bytes === OVERLONG_LINE) {
          badRecord(ctx, `${file}:${lineNumber}`, overlongReason(ctx.maxDocumentBytes));
          continue;
        }
        if (bytes.length === 0) continue;
        const line = decoder.decode(bytes);
        if (!NON_SPACE.test(line)) continue;
        let value: unknown;
        try {
          value = JSON.parse(line);
        } catch (e) {
          badRecord(ctx, `${file}:${lineNumber}`, e instanceof Error ? e.message : String(e));
          continue;
        }
        const fields = recordFields(value, ctx.textPath, input.textField, ctx.idPath, input.idField);
        if (!fields.ok) {
          badRecord(ctx, `${file}:${lineNumber}`, fields.reason);
          continue;
        }
        ctx.stats.documents++;
        yield { file, line: lineNumber, id: fields.id, text: fields.text };
      }
    }
  } finally {
    ctx.stats.invalidUtf8Replaced += decoder.replaced;
  }
}

/** json-array: one top-level array of objects, streamed element by element. */
export async function* readJsonArray(file: string, ctx: ReadContext): AsyncGenerator<Document> {
  if (skipBinaryFile(file, ctx.input, ctx.stats)) return;
  const { input } = ctx;
  const decoder = new Utf8StreamDecoder();
  const elements = readArrayElements(file, ctx.onDiskBytes, decoder);
  try {
    for (;;) {
      let step: IteratorResult<{ index: number; value: unknown }>;
      try {
        step = await elements.next();
      } catch (e) {
        if (e instanceof JsonSyntaxError) throw await jsonSyntaxError(file, e);
        throw e;
      }
      if (step.done) break;
      const { index, value } = step.value;
      const fields = recordFields(value, ctx.textPath, input.textField, ctx.idPath, input.idField);
      if (!fields.ok) {
        badRecord(ctx, `${file}: array element ${index + 1}`, fields.reason);
        continue;
      }
      ctx.stats.documents++;
      yield { file, line: index + 1, id: fields.id, text: fields.text };
    }
  } finally {
    await elements.return(undefined);
    ctx.stats.invalidUtf8Replaced += decoder.replaced;
  }
}

async function jsonSyntaxError(file: string, e: JsonSyntaxError): Promise<KindredError> {
  const located = await locateJsonError(file);
  const where = located ? `${file}:${located.line}` : file;
  const reason = describeJsonSyntaxError(located ? located.reason : e.message);
  return new KindredError(`${where}: invalid JSON (${reason}); the file must hold one JSON array of objects`);
}

export const READERS: Record<ConcreteFormat, (file: string, ctx: ReadContext) => AsyncGenerator<Document>> = {
  'text-lines': readTextLines,
  'text-file': readTextFile,
  jsonl: readJsonLines,
  'json-array': readJsonArray,
};
