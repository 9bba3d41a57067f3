/**
 * `kindred serve`: an HTTP JSON service over one build, loaded once. Endpoints (all answers are JSON):
 *
 *   GET  /health                                    status, sizes, what the build holds
 *   GET  /manifest                                  the build's manifest.json
 *   GET  /neighbors?term=T[&measure=M][&k=N][&source=rows|vectors]
 *   GET  /vector?term=T                             the term's SVD vector
 *   POST /similarity  {"pairs": [["a","b"], …], "measure"?: M, "source"?: S}
 *
 * A bad request gets a 4xx status and {"error": "<what is wrong and what to send>"}; nothing a client sends can
 * stop the server. The service maps no request path to a file: it answers only the routes above from memory, so it
 * serves nothing outside the build folder (nor most of what is inside it).
 */
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { isKindredError, KindredError } from '../errors.js';
import { getMeasure, isMeasureName, MEASURE_NAMES, type MeasureName } from '../measures/index.js';
import { normalizeTerm } from '../tokenize/index.js';
import { TOOL_VERSION } from '../version.js';
import { closestTerms } from '../edit-distance.js';
import { scoreOf } from './score.js';
import { ServedBuild, type ServedSource } from './served-build.js';

/** Limits on what one request may ask for. */
export const SERVICE_LIMITS = Object.freeze({
  /** Request body bytes (POST /similarity). */
  maxBodyBytes: 1 << 20,
  /** Pairs per /similarity request. */
  maxPairs: 10_000,
  /** Neighbours per /neighbors request. */
  maxK: 1000,
  /** Characters of a query term. */
  maxTermLength: 256,
  /** Characters of a request URL. */
  maxUrlLength: 4096,
});

/** A client error: answered with `status` and the message. */
class RequestError extends Error {
  constructor(
    readonly status: number,
    message: string,
    readonly headers: Record<string, string> = {},
  ) {
    super(message);
  }
}

type Json = null | boolean | number | string | Json[] | { [key: string]: Json };

function send(res: http.ServerResponse, status: number, body: unknown, headers: Record<string, string> = {}): void {
  const text = JSON.stringify(body);
  res.writeHead(status, {
    'content-type': 'application/json; charset=utf-8',
    'content-length': Buffer.byteLength(text),
    'cache-control': 'no-store',
    'x-content-type-options': 'nosniff',
    ...headers,
  });
  res.end(res.req.method === 'HEAD' ? undefined : text);
}

/** The routes and the methods each allows. */
const ROUTES: Record<string, readonly string[]> = {
  '/health': ['GET', 'HEAD'],
  '/manifest': ['GET', 'HEAD'],
  '/neighbors': ['GET', 'HEAD'],
  '/vector': ['GET', 'HEAD'],
  '/similarity': ['POST'],
};

/** Reads a request body of at most `limit` bytes. */
function readBody(req: http.IncomingMessage, limit: number): Promise<Buffer> {
  return new Promise((resolve, reject) => {
    const declared = Number(req.headers['content-length']);
    if (Number.isFinite(declared) && declared > limit) {
      reject(new RequestError(413, `request body of ${declared} bytes is above the limit of ${limit} bytes; send fewer pairs per request`));
      return;
    }
    const chunks: Buffer[] = [];
    let size = 0;
    let over = false;
    req.on('data', (chunk: Buffer) => {
      if (over) return;
      size += chunk.length;
      if (size > limit) {
        over = true;
        reject(new RequestError(413, `request body is above the limit of ${limit} bytes; send fewer pairs per request`));
        return;
      }
      chunks.push(chunk);
    });
    req.on('end', () => {
      if (!over) resolve(Buffer.concat(chunks));
    });
    req.on('error', reject);
  });
}

export interface ServiceOptions {
  /** Port to listen on; 0 picks a free one. */
  port: number;
  /** Interface to bind; loopback unless told otherwise. */
  host?: string;
  /** Called with one line per failed request that was not the client's fault (to log). */
  onInternalError?: (message: string) => void;
}

export interface RunningService {
  server: http.Server;
  build: ServedBuild;
  /** e.g. http://127.0.0.1:8467 */
  url: string;
  close(): Promise<void>;
}

/** The request handler over a loaded build (exported for tests and for embedding in another server). */
export function createHandler(build: ServedBuild, onInternalError: (message: string) => void = () => undefined): http.RequestListener {
  const tokenize = build.manifest.config.tokenize;
  const defaultMeasure: MeasureName = getMeasure(build.table?.record.measure ?? 'cosine').name;
  const defaultSource: ServedSource = build.table?.record.source ?? 'rows';

  const termParam = (value: unknown, name: string): number => {
    if (typeof value !== 'string' || value.length === 0) throw new RequestError(400, `${name}: missing; give a vocabulary term, e.g. ${name}=${encodeURIComponent(build.term(0) ?? 'word')}`);
    if (value.length > SERVICE_LIMITS.maxTermLength) throw new RequestError(400, `${name}: longer than ${SERVICE_LIMITS.maxTermLength} characters`);
    const q = normalizeTerm(value, tokenize);
    const id = build.lookup(q);
    if (id !== undefined) return id;
    const near = build.size <= 200_000 ? closestTerms(q, build.vocab.terms) : [];
    throw new RequestError(404, `${name}: "${value}" is not in the vocabulary${near.length > 0 ? `; closest terms: ${near.join(', ')}` : ''}`);
  };
  const measureParam = (value: unknown): MeasureName => {
    if (value === undefined || value === null) return defaultMeasure;
    if (typeof value !== 'string' || !isMeasureName(value)) throw new RequestError(400, `measure: ${JSON.stringify(value)} is not one of ${MEASURE_NAMES.join(', ')}`);
    return value;
  };
  const sourceParam = (value: unknown): ServedSource => {
    if (value === undefined || value === null) return defaultSource;
    if (value !== 'rows' && value !== 'vectors') throw new RequestError(400, `source: ${JSON.stringify(value)} is not one of rows, vectors`);
    if (value === 'vectors' && !build.vectors) throw new RequestError(400, 'source: this build has no vectors (it was built without vectors.enabled)');
    return value;
  };
  const kParam = (value: string | null): number => {
    if (value === null) return 10;
    const k = Number(value);
    if (!/^\d+$/.test(value) || !Number.isInteger(k) || k < 1 || k > SERVICE_LIMITS.maxK) throw new RequestError(400, `k: "${value}" is not a whole number from 1 to ${SERVICE_LIMITS.maxK}`);
    return k;
  };
  const single = (params: URLSearchParams, name: string): string | null => {
    const all = params.getAll(name);
    if (all.length > 1) throw new RequestError(400, `${name}: given ${all.length} times; give it once`);
    return all.length === 1 ? all[0] : null;
  };
  const onlyParams = (params: URLSearchParams, allowed: string[]): void => {
    for (const key of params.keys()) {
      if (!allowed.includes(key)) throw new RequestError(400, `unknown parameter "${key}" (allowed: ${allowed.join(', ')})`);
    }
  };

  const health = (): Json => ({
    status: 'ok',
    version: TOOL_VERSION,
    terms: build.size,
    columns: build.manifest.matrix.cols,
    configHash: build.manifest.configHash,
    vectors: build.vectors ? build.vectors.vectors.dim : null,
    neighborTable: build.table ? { measure: build.table.record.measure, k: build.table.record.k, source: build.table.record.source, terms: build.table.record.queried } : null,
    uptimeSeconds: Math.round((Date.now() - build.loadedAt) / 1000),
  });

  const neighbors = (params: URLSearchParams): Json => {
    onlyParams(params, ['term', 'measure', 'k', 'source']);
    const id = termParam(single(params, 'term'), 'term');
    const measure = measureParam(single(params, 'measure') ?? undefined);
    const source = sourceParam(single(params, 'source') ?? undefined);
    const k = kParam(single(params, 'k'));
    const r = build.neighbors(id, source, measure, k);
    return { term: build.term(id), measure, source, k, from: r.from, neighbors: r.neighbors as unknown as Json };
  };

  const vector = (params: URLSearchParams): Json => {
    onlyParams(params, ['term']);
    if (!build.vectors) throw new RequestError(404, 'this build has no vectors (it was built without vectors.enabled)');
    const id = termParam(single(params, 'term'), 'term');
    return { term: build.term(id), id, dimensions: build.vectors.vectors.dim, vector: build.vector(id) };
  };

  const similarity = async (req: http.IncomingMessage): Promise<Json> => {
    const type = req.headers['content-type'] ?? '';
    if (!/^application\/json\b/i.test(type)) throw new RequestError(415, `send the body as application/json (got ${type === '' ? 'no content-type' : JSON.stringify(type)})`);
    const raw = await readBody(req, SERVICE_LIMITS.maxBodyBytes);
    let body: unknown;
    try {
      body = JSON.parse(raw.toString('utf8'));
    } catch (e) {
      throw new RequestError(400, `body is not valid JSON (${(e as Error).message}); send {"pairs": [["term", "term"], ...]}`);
    }
    if (typeof body !== 'object' || body === null || Array.isArray(body)) throw new RequestError(400, 'body must be a JSON object: {"pairs": [["term", "term"], ...], "measure"?: ..., "source"?: ...}');
    const b = body as Record<string, unknown>;
    for (const key of Object.keys(b)) if (!['pairs', 'measure', 'source'].includes(key)) throw new RequestError(400, `unknown key "${key}" (allowed: pairs, measure, source)`);
    const measure = measureParam(b.measure);
    const source = sourceParam(b.source);
    if (!Array.isArray(b.pairs) || b.pairs.length === 0) throw new RequestError(400, 'pairs: must be a non-empty array of [term, term] pairs');
    if (b.pairs.length > SERVICE_LIMITS.maxPairs) throw new RequestError(413, `pairs: ${b.pairs.length} pairs, above the limit of ${SERVICE_LIMITS.maxPairs} per request`);
    const results: Json[] = [];
    b.pairs.forEach((pair: unknown, i: number) => {
      if (!Array.isArray(pair) || pair.length !== 2 || typeof pair[0] !== 'string' || typeof pair[1] !== 'string') {
        throw new RequestError(400, `pairs[${i}]: must be an array of two strings`);
      }
      try {
        const a = termParam(pair[0], `pairs[${i}][0]`);
        const c = termParam(pair[1], `pairs[${i}][1]`);
        const distance = build.distance(a, c, source, measure);
        results.push({ a: build.term(a), b: build.term(c), distance, score: scoreOf(measure, distance) });
      } catch (e) {
        // an unknown term spoils only its own pair
        if (e instanceof RequestError && e.status === 404) results.push({ a: pair[0], b: pair[1], error: e.message });
        else throw e;
      }
    });
    return { measure, source, results };
  };

  return (req, res) => {
    const handle = async (): Promise<void> => {
      const rawUrl = req.url ?? '/';
      if (rawUrl.length > SERVICE_LIMITS.maxUrlLength) throw new RequestError(414, `URL longer than ${SERVICE_LIMITS.maxUrlLength} characters`);
      let url: URL;
      try {
        url = new URL(rawUrl, 'http://localhost');
      } catch {
        throw new RequestError(400, 'malformed URL');
      }
      const route = url.pathname;
      const methods = Object.hasOwn(ROUTES, route) ? ROUTES[route] : undefined;
      if (!methods) throw new RequestError(404, `no such endpoint ${JSON.stringify(route.slice(0, 100))}; endpoints: ${Object.keys(ROUTES).join(', ')}`);
      const method = req.method ?? 'GET';
      if (!methods.includes(method)) throw new RequestError(405, `${route} accepts ${methods.join(', ')}, not ${method}`, { allow: methods.join(', ') });
      switch (route) {
        case '/health':
          send(res, 200, health());
          return;
        case '/manifest':
          send(res, 200, build.manifest);
          return;
        case '/neighbors':
          send(res, 200, neighbors(url.searchParams));
          return;
        case '/vector':
          send(res, 200, vector(url.searchParams));
          return;
        case '/similarity':
          send(res, 200, await similarity(req));
          return;
      }
    };
    handle().catch((e: unknown) => {
      if (res.headersSent) {
        res.destroy();
        return;
      }
      if (e instanceof RequestError) {
        // an unread body is discarded (bounded by the request timeout), so the client can read this answer
        if (e.status === 413) req.resume();
        send(res, e.status, { error: e.message }, e.headers);
      } else if (isKindredError(e)) {
        send(res, 400, { error: e.message });
      } else {
        onInternalError(`${req.method} ${req.url}: ${(e as Error)?.stack ?? String(e)}`);
        send(res, 500, { error: 'internal error; the server logged it' });
      }
    });
  };
}

/** Loads a build and listens. Resolves once the port is bound. */
export async function startService(dir: string, opts: ServiceOptions): Promise<RunningService> {
  const build = new ServedBuild(dir);
  const host = opts.host ?? '127.0.0.1';
  const server = http.createServer({ requestTimeout: 30_000, headersTimeout: 10_000, maxHeaderSize: 16_384 }, createHandler(build, opts.onInternalError));
  // a malformed request line or header never reaches the handler: answer it here instead of dropping the socket silently
  server.on('clientError', (err: NodeJS.ErrnoException, socket) => {
    if (!socket.writable) return;
    const status = err.code === 'HPE_HEADER_OVERFLOW' ? 431 : 400;
    const body = JSON.stringify({ error: status === 431 ? 'request headers too large' : 'malformed HTTP request' });
    socket.end(`HTTP/1.1 ${status} ${status === 431 ? 'Request Header Fields Too Large' : 'Bad Request'}\r\ncontent-type: application/json; charset=utf-8\r\ncontent-length: ${Buffer.byteLength(body)}\r\nconnection: close\r\n\r\n${body}`);
  });
  await new Promise<void>((resolve, reject) => {
    const onError = (e: NodeJS.ErrnoException): void => {
      reject(
        e.code === 'EADDRINUSE'
          ? new KindredError(`port ${opts.port} on ${host} is already in use; choose another with --port`)
          : e.code === 'EACCES'
            ? new KindredError(`no permission to listen on ${host}:${opts.port}; choose a port above 1023 with --port`)
            : e.code === 'EADDRNOTAVAIL' || e.code === 'ENOTFOUND'
              ? new KindredError(`--host ${host}: not an address of this machine`)
              : e,
      );
    };
    server.once('error', onError);
    server.listen(opts.port, host, () => {
      server.off('error', onError);
      resolve();
    });
  });
  const address = server.address() as AddressInfo;
  const shownHost = address.family === 'IPv6' ? `[${address.address}]` : address.address;
  return {
    server,
    build,
    url: `http://${shownHost}:${address.port}`,
    close: () =>
      new Promise<void>((resolve) => {
        server.close(() => resolve());
        server.closeAllConnections();
      }),
  };
}
