export function mulberry32(seed: number): () => number;
