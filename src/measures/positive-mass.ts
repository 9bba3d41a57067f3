/** Σ max(x_i, 0): the mass a row keeps once negative weights are clipped to zero. */
export function positiveMass(values: Float64Array): number {
  let s = 0;
  for (let k = 0; k < values.length; k++) if (values[k] > 0) s += values[k];
  return s;
}
