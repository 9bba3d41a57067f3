/** Messages between the local executor and its worker threads. */
import type { MapKind } from './handlers.js';

export type ToWorker =
  | { type: 'setup'; kind: MapKind; setup: unknown }
  | { type: 'task'; index: number; task: unknown }
  | { type: 'finish' };

export type FromWorker =
  | { type: 'ready' }
  | { type: 'progress'; bytes: number }
  | { type: 'result'; index: number; result: unknown }
  | { type: 'partial'; partial: unknown }
  | { type: 'error'; message: string; stack: string | undefined; userError: boolean };
