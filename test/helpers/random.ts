/** mulberry32: a small seeded PRNG so every test run sees the same data (one implementation: scripts/random.mjs). */
export { mulberry32 } from '../../scripts/random.mjs';
