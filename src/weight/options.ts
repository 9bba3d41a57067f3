import type { WeightingConfig } from '../config/types.js';
import { KindredError } from '../errors.js';

/** Checks the numeric weighting options a scheme relies on; a bad value is the user's to fix. */
export function checkWeightingOptions(cfg: WeightingConfig): void {
  if (!Number.isFinite(cfg.smoothing) || cfg.smoothing <= 0) {
    throw new KindredError(
      `weighting.smoothing must be a finite number > 0 (got ${String(cfg.smoothing)}); use 1 for no smoothing or 0.75 for the usual smoothing`,
    );
  }
  if (!Number.isFinite(cfg.shift) || cfg.shift <= 0) {
    throw new KindredError(`weighting.shift must be a finite number > 0 (got ${String(cfg.shift)}); use 1 for no shift`);
  }
}
