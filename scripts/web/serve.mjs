// Serves a folder on 127.0.0.1 only, with the right MIME types (wasm included) and no
// caching. Usage: node serve.mjs DIR [--port N]. Prints the address; exits with a clear
// message when the port is taken. Tests import `serve` to start it in-process.
import { createServer } from 'node:http';
import { readFile, stat } from 'node:fs/promises';
import { extname, join, normalize, resolve, sep } from 'node:path';
import { pathToFileURL } from 'node:url';

const TYPES = {
  '.html': 'text/html; charset=utf-8',
  '.js': 'text/javascript; charset=utf-8',
  '.mjs': 'text/javascript; charset=utf-8',
  '.css': 'text/css; charset=utf-8',
  '.wasm': 'application/wasm',
  '.json': 'application/json',
  '.csv': 'text/csv; charset=utf-8',
  '.svg': 'image/svg+xml',
  '.md': 'text/plain; charset=utf-8',
};

/** Starts serving `dir` on 127.0.0.1:`port` (0 = any free port); resolves to the server. */
export function serve(dir, port = 0, log = () => {}) {
  const root = resolve(dir);
  const server = createServer(async (req, res) => {
    try {
      const path = decodeURIComponent(new URL(req.url, 'http://localhost').pathname);
      let file = normalize(join(root, path));
      if (file !== root && !file.startsWith(root + sep)) {
        res.writeHead(403).end('outside the served folder');
        return;
      }
      if ((await stat(file)).isDirectory()) file = join(file, 'index.html');
      const body = await readFile(file);
      res.writeHead(200, {
        'Content-Type': TYPES[extname(file)] ?? 'application/octet-stream',
        'Cache-Control': 'no-store',
        'X-Content-Type-Options': 'nosniff',
      });
      res.end(body);
      log(`${req.method} ${path} 200`);
    } catch {
      res.writeHead(404, { 'Content-Type': 'text/plain' }).end('not found');
      log(`${req.method} ${req.url} 404`);
    }
  });
  return new Promise((resolvePromise, reject) => {
    server.once('error', reject);
    server.listen(port, '127.0.0.1', () => resolvePromise(server));
  });
}

if (import.meta.url === pathToFileURL(process.argv[1]).href) {
  const args = process.argv.slice(2);
  const dir = args[0] ?? 'www';
  const at = args.indexOf('--port');
  const port = at >= 0 ? Number(args[at + 1]) : 8000;
  if (!Number.isInteger(port) || port < 0 || port > 65535) {
    console.error(`--port: expected a whole number from 0 to 65535, found ${args[at + 1]}`);
    process.exit(2);
  }
  serve(dir, port).then(
    (server) => {
      const { port: actual } = server.address();
      console.log(`ringline is served at http://127.0.0.1:${actual}/ (only this machine can reach it; Ctrl-C stops it)`);
    },
    (error) => {
      if (error.code === 'EADDRINUSE') {
        console.error(`port ${port} on 127.0.0.1 is taken by another program: choose another with --port N`);
      } else {
        console.error(`could not serve ${dir} on port ${port}: ${error.message}`);
      }
      process.exit(2);
    },
  );
}
