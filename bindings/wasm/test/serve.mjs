// A small static server for the demo page, on 127.0.0.1 only. It serves
//   /          bindings/wasm/www/
//   /pkg/      bindings/wasm/pkg-web/   (the package built by build.sh)
//   /models/   models-demo/*.onnx       (the demo models)
// and nothing else (GET and HEAD; no directory listings; no path may leave its folder).
// It is bounded: it stops by itself after --max-seconds (default 1800) or --max-requests
// (default 100000), whichever comes first.
//
//   node bindings/wasm/test/serve.mjs [--port 8787] [--max-seconds 1800]
//
// The browser test imports startServer() and stops the server itself.

import { createServer } from "node:http";
import { readFile, stat } from "node:fs/promises";
import { fileURLToPath } from "node:url";
import path from "node:path";

const here = path.dirname(fileURLToPath(import.meta.url));
const wasmDir = path.resolve(here, "..");
const rootDir = path.resolve(wasmDir, "../..");

const MOUNTS = [
  { prefix: "/pkg/", dir: path.join(wasmDir, "pkg-web") },
  { prefix: "/models/", dir: path.join(rootDir, "models-demo"), only: /^[\w.-]+\.onnx$/ },
  { prefix: "/", dir: path.join(wasmDir, "www") },
];

const TYPES = {
  ".html": "text/html; charset=utf-8",
  ".css": "text/css; charset=utf-8",
  ".js": "text/javascript; charset=utf-8",
  ".mjs": "text/javascript; charset=utf-8",
  ".json": "application/json",
  ".wasm": "application/wasm",
  ".onnx": "application/octet-stream",
  ".png": "image/png",
  ".svg": "image/svg+xml",
  ".ts": "text/plain; charset=utf-8",
};

/** Maps a URL path to a file inside one of the mounts, or null. */
function resolve(urlPath) {
  let decoded;
  try {
    decoded = decodeURIComponent(urlPath);
  } catch {
    return null;
  }
  if (decoded.includes("\0")) return null;
  if (decoded.endsWith("/")) decoded += "index.html";
  for (const m of MOUNTS) {
    if (!decoded.startsWith(m.prefix)) continue;
    const rel = decoded.slice(m.prefix.length);
    if (m.only && !m.only.test(rel)) return null;
    const file = path.resolve(m.dir, rel);
    if (file !== m.dir && !file.startsWith(m.dir + path.sep)) return null;
    return file;
  }
  return null;
}

/**
 * Starts the server. Resolves to { url, close() }. `port` 0 picks a free port.
 * @param {{port?: number, maxSeconds?: number, maxRequests?: number, log?: (s: string) => void}} o
 */
export function startServer({ port = 0, maxSeconds = 1800, maxRequests = 100000, log = () => {} } = {}) {
  let served = 0;
  const server = createServer(async (req, res) => {
    served += 1;
    if (served > maxRequests) {
      res.writeHead(503).end("request budget spent\n");
      close();
      return;
    }
    if (req.method !== "GET" && req.method !== "HEAD") {
      res.writeHead(405, { Allow: "GET, HEAD" }).end();
      return;
    }
    const url = new URL(req.url ?? "/", "http://127.0.0.1");
    const file = resolve(url.pathname);
    let body;
    try {
      if (!file || !(await stat(file)).isFile()) throw new Error("not a file");
      body = await readFile(file);
    } catch {
      log(`404 ${url.pathname}`);
      res.writeHead(404, { "Content-Type": "text/plain; charset=utf-8" }).end("not found\n");
      return;
    }
    log(`200 ${url.pathname}`);
    res.writeHead(200, {
      "Content-Type": TYPES[path.extname(file)] ?? "application/octet-stream",
      "Content-Length": body.length,
      "Cache-Control": "no-store",
      "X-Content-Type-Options": "nosniff",
    });
    res.end(req.method === "HEAD" ? undefined : body);
  });
  server.requestTimeout = 10000;
  server.headersTimeout = 5000;
  server.keepAliveTimeout = 1000;
  let timer;
  function close() {
    clearTimeout(timer);
    server.closeAllConnections?.();
    return new Promise((done) => server.close(() => done()));
  }
  return new Promise((ok, fail) => {
    server.once("error", fail);
    server.listen(port, "127.0.0.1", () => {
      timer = setTimeout(close, maxSeconds * 1000);
      timer.unref();
      const { port: p } = server.address();
      ok({ url: `http://127.0.0.1:${p}/`, close });
    });
  });
}

if (process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  const arg = (name, dflt) => {
    const i = process.argv.indexOf(name);
    return i > 0 ? Number(process.argv[i + 1]) : dflt;
  };
  const maxSeconds = arg("--max-seconds", 1800);
  const { url } = await startServer({
    port: arg("--port", 8787),
    maxSeconds,
    log: (s) => process.stdout.write(`${s}\n`),
  });
  process.stdout.write(`demo page: ${url}  (stops by itself in ${maxSeconds} s; Ctrl-C to stop now)\n`);
}
