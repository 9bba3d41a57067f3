import type { Command } from 'commander';
import { KindredError } from '../errors.js';
import { runAction } from './run.js';

function portNumber(value: string): number {
  const n = Number(value);
  if (!/^\d+$/.test(value) || n > 65535) throw new KindredError(`--port: "${value}" is not a port number from 0 to 65535`);
  return n;
}

export function registerServe(program: Command): void {
  program
    .command('serve')
    .description('answer neighbour, similarity and vector queries over HTTP with JSON, from a build loaded once')
    .argument('<build-dir>', 'a folder written by "kindred build"')
    .option('--port <n>', 'TCP port (0 picks a free one)', '8467')
    .option('--host <address>', 'address to listen on; loopback unless you choose to expose the build to a network', '127.0.0.1')
    .addHelpText(
      'after',
      '\nEndpoints: GET /health, GET /manifest, GET /neighbors?term=T&measure=M&k=N&source=rows|vectors,\n' +
        'GET /vector?term=T, POST /similarity {"pairs": [["a","b"]], "measure": M, "source": S}.\n' +
        'Caution: related-term data reproduces the corpus, personal data included; review it before a live service uses it.',
    )
    .action(
      runAction(async (dir: string, opts: { port: string; host: string }) => {
        const port = portNumber(opts.port);
        const { startService } = await import('../query/service.js');
        const service = await startService(dir, {
          port,
          host: opts.host,
          onInternalError: (message) => process.stderr.write(`kindred: serve: internal error (please report): ${message}\n`),
        });
        process.stderr.write(`kindred: serving ${dir} (${service.build.size} terms) at ${service.url}; Ctrl-C stops\n`);
        await new Promise<void>((resolve) => {
          const stop = (): void => {
            process.stderr.write('kindred: stopping\n');
            void service.close().then(resolve);
          };
          process.once('SIGINT', stop);
          process.once('SIGTERM', stop);
        });
      }),
    );
}
