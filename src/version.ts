import { readFileSync } from 'node:fs';

/** The package version, read from package.json beside the compiled code (dist/ or src/ are one level down). */
export const TOOL_VERSION: string = (JSON.parse(readFileSync(new URL('../package.json', import.meta.url), 'utf8')) as { version: string }).version;
