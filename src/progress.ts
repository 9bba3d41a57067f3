/**
 * Progress for long stages: a bar with rate and ETA when stderr is a terminal, one line per stage otherwise,
 * so a scheduled run's log stays readable.
 */
export interface Progress {
  /** Starts a stage; total is in `unit`s, or 0 when unknown. */
  start(stage: string, total: number, unit: string): void;
  update(done: number): void;
  /** Ends the current stage with a short summary. */
  end(summary: string): void;
}

function fmtNum(n: number): string {
  if (n >= 1e9) return `${(n / 1e9).toFixed(2)}G`;
  if (n >= 1e6) return `${(n / 1e6).toFixed(2)}M`;
  if (n >= 1e3) return `${(n / 1e3).toFixed(1)}k`;
  return String(Math.round(n));
}

function fmtSeconds(s: number): string {
  if (!Number.isFinite(s)) return '?';
  if (s < 60) return `${s.toFixed(1)}s`;
  const m = Math.floor(s / 60);
  return `${m}m${String(Math.round(s - m * 60)).padStart(2, '0')}s`;
}

export class StreamProgress implements Progress {
  private stage = '';
  private total = 0;
  private unit = '';
  private started = 0;
  private lastDraw = 0;

  constructor(
    private readonly out: NodeJS.WriteStream,
    private readonly interactive: boolean = Boolean(out.isTTY),
  ) {}

  start(stage: string, total: number, unit: string): void {
    this.stage = stage;
    this.total = total;
    this.unit = unit;
    this.started = performance.now();
    this.lastDraw = 0;
    if (this.interactive) this.draw(0);
  }

  update(done: number): void {
    if (!this.interactive) return;
    const now = performance.now();
    if (now - this.lastDraw < 100) return;
    this.lastDraw = now;
    this.draw(done);
  }

  private draw(done: number): void {
    const secs = (performance.now() - this.started) / 1000;
    const rate = secs > 0 ? done / secs : 0;
    let line = `${this.stage.padEnd(10)} `;
    if (this.total > 0) {
      const frac = Math.min(1, done / this.total);
      const width = 28;
      const filled = Math.round(frac * width);
      const eta = rate > 0 ? (this.total - done) / rate : Infinity;
      line += `[${'#'.repeat(filled)}${'.'.repeat(width - filled)}] ${(frac * 100).toFixed(0).padStart(3)}% `;
      line += `${fmtNum(rate)} ${this.unit}/s  ETA ${fmtSeconds(eta)}`;
    } else {
      line += `${fmtNum(done)} ${this.unit}  ${fmtNum(rate)} ${this.unit}/s`;
    }
    this.out.write(`\r\x1b[2K${line}`);
  }

  end(summary: string): void {
    const secs = (performance.now() - this.started) / 1000;
    const line = `kindred: ${this.stage}: ${summary} (${fmtSeconds(secs)})`;
    this.out.write(this.interactive ? `\r\x1b[2K${line}\n` : `${line}\n`);
  }
}

/** Says nothing: for library callers and tests. */
export const silentProgress: Progress = { start() {}, update() {}, end() {} };
