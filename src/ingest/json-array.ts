/**
 * Streaming reader for a file holding one top-level JSON array: stream-json's tokenizer and its
 * streamArray assembler are driven chunk by chunk, so only one element is held in memory at a time.
 */
import type { Token } from 'stream-json/core/parser.js';
import { readContentBytes, oneLine } from './bytes.js';
import { Utf8StreamDecoder } from './utf8.js';

/** stream-chain's markers, shared through the global symbol registry. */
const NONE = Symbol.for('object-stream.none');
const MANY = Symbol.for('object-stream.many');

const NON_SPACE = /\S/;
const LOOKAHEAD_PADDING = ' '.repeat(32);

/** One element of the array: its 0-based index and its parsed value. */
export interface ArrayElement {
  index: number;
  value: unknown;
}

/** A JSON syntax error reported by the parser (as opposed to an I/O or gzip error). */
export class JsonSyntaxError extends Error {}

function valuesOf(out: unknown): readonly unknown[] {
  if (out === NONE || out === undefined) return [];
  if (typeof out === 'object' && out !== null && (out as Record<symbol, unknown>)[MANY] === 1) {
    return (out as { values: unknown[] }).values;
  }
  return [out];
}

/**
 * stream-json, loaded on first use: it takes longer to load (some 60 ms) than most inputs, which are not JSON
 * arrays, take to read, and every counting thread would load it too.
 */
let streamJson: Promise<[typeof import('stream-json/core/parser.js'), typeof import('stream-json/core/streamers/stream-array.js')]> | null = null;

/** Incremental parser: feed text, collect the array elements completed by it. */
class ArrayElementParser {
  private readonly parse: ReturnType<typeof import('stream-json/core/parser.js').jsonParser>;
  private readonly elements: ReturnType<typeof import('stream-json/core/streamers/stream-array.js').streamArray>;
  /** Set once a non-whitespace character has been fed: an all-blank file is an empty input, not an error. */
  sawContent = false;

  private constructor([parser, streamers]: Awaited<NonNullable<typeof streamJson>>) {
    this.parse = parser.jsonParser({ packValues: true, streamValues: false });
    this.elements = streamers.streamArray();
  }

  static async create(): Promise<ArrayElementParser> {
    streamJson ??= Promise.all([import('stream-json/core/parser.js'), import('stream-json/core/streamers/stream-array.js')]);
    return new ArrayElementParser(await streamJson);
  }

  feed(text: string, out: ArrayElement[]): void {
    if (!this.sawContent) {
      if (!NON_SPACE.test(text)) return;
      this.sawContent = true;
    }
    this.run(text, out);
  }

  finish(out: ArrayElement[]): void {
    if (this.sawContent) this.run(NONE, out);
  }

  private run(input: string | symbol, out: ArrayElement[]): void {
    let tokens: readonly unknown[];
    try {
      tokens = valuesOf((this.parse as unknown as (v: string | symbol) => unknown)(input));
      for (const token of tokens) {
        for (const item of valuesOf(this.elements(token as Token))) {
          const { key, value } = item as { key: number; value: unknown };
          out.push({ index: key, value });
        }
      }
    } catch (e) {
      throw new JsonSyntaxError(e instanceof Error ? e.message : String(e));
    }
  }
}

/** Streams the elements of the top-level JSON array in `file`; throws JsonSyntaxError on broken JSON. */
export async function* readArrayElements(
  file: string,
  onDiskBytes: (n: number) => void,
  decoder: Utf8StreamDecoder,
): AsyncGenerator<ArrayElement> {
  const parser = await ArrayElementParser.create();
  const out: ArrayElement[] = [];
  for await (const chunk of readContentBytes(file, onDiskBytes)) {
    out.length = 0;
    parser.feed(decoder.decode(chunk), out);
    for (const element of out) yield element;
  }
  out.length = 0;
  parser.feed(decoder.end(), out);
  parser.finish(out);
  for (const element of out) yield element;
}

/**
 * Error path only: parses the file again, feeding it line by line, to find the line where the
 * parser stops. Returns null if the error does not reproduce (the file changed meanwhile).
 */
export async function locateJsonError(file: string): Promise<{ line: number; reason: string } | null> {
  const parser = await ArrayElementParser.create();
  const decoder = new Utf8StreamDecoder();
  const sink: ArrayElement[] = [];
  let line = 1;
  let lastContentLine = 1;
  const feed = (text: string): void => {
    if (NON_SPACE.test(text)) lastContentLine = line;
    parser.feed(text, sink);
    sink.length = 0;
  };
  try {
    for await (const chunk of readContentBytes(file, () => {})) {
      let start = 0;
      for (;;) {
        const nl = chunk.indexOf(0x0a, start);
        const end = nl === -1 ? chunk.length : nl + 1;
        if (end > start) feed(decoder.decode(chunk.subarray(start, end)));
        if (nl === -1) break;
        // The parser waits for up to 16 characters of lookahead before it reports a bad lexeme; in
        // JSON a line end is always between tokens, so padding it with spaces is harmless and makes
        // the error surface on its own line.
        feed(LOOKAHEAD_PADDING);
        line++;
        start = nl + 1;
      }
    }
    feed(decoder.end());
  } catch (e) {
    if (e instanceof JsonSyntaxError) return { line, reason: e.message };
    throw e;
  }
  try {
    parser.finish(sink);
  } catch (e) {
    if (e instanceof JsonSyntaxError) return { line: lastContentLine, reason: e.message };
    throw e;
  }
  return null;
}

/** The parser's message, tidied for a one-line error. */
export function describeJsonSyntaxError(message: string): string {
  if (/Top-level object should be an array/i.test(message)) return 'the top-level value is not an array';
  return oneLine(message.replace(/^Parser (cannot parse input: )?/, ''));
}
