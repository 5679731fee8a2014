// Writes the self-contained page: index.html with the stylesheet, the page script, the
// worker (with the wasm-bindgen glue) and the wasm (base64) inlined, and a Content-Security-
// Policy that allows no connection at all. Usage: node single-file.mjs WWW_DIR OUT_FILE
import { createHash } from 'node:crypto';
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';

const [www, out] = process.argv.slice(2);
const read = (name) => readFileSync(join(www, name), 'utf8');
const hash = (text) => `'sha256-${createHash('sha256').update(text, 'utf8').digest('base64')}'`;

function noScriptEnd(name, text) {
  if (/<\/script/i.test(text)) throw new Error(`${name} contains "</script", which cannot be inlined`);
  return text;
}

let html = read('index.html');
const css = read('style.css');
const main = noScriptEnd('main.js', read('main.js'));
const glue = noScriptEnd('pkg/ringline.js', read('pkg/ringline.js'));
const worker = read('worker.js');
const wasm = readFileSync(join(www, 'pkg/ringline_bg.wasm')).toString('base64');

// The glue's exports become the worker's `core`; the wasm comes from the base64 text.
const exported = [...glue.matchAll(/^export (?:function|class) (\w+)/gm)].map((m) => m[1]);
const init = glue.match(/^export default (\w+);?$/m)?.[1] ?? glue.match(/^export \{[^}]*\b(\w+) as default\b/m)?.[1];
if (!init) throw new Error('pkg/ringline.js: the default export (init) was not found');
const begin = worker.indexOf('// ringline-core-import-begin');
const end = worker.indexOf('// ringline-core-import-end');
if (begin < 0 || end < 0) throw new Error('worker.js: the core import markers are missing');
const loader = `const core = { ${exported.join(', ')} };
const loadCore = () => ${init}({ module_or_path: Uint8Array.from(atob('${wasm}'), (c) => c.charCodeAt(0)) });
`;
// A page opened from disk has an opaque origin, from which Chromium will not start a module
// worker; the worker is therefore a classic script: the glue's exports become plain
// declarations and its default wasm location (never used here) the worker's own address.
const classicGlue = glue
  .replace(/^export (function|class) /gm, '$1 ')
  .replace(/^export \{[^}]*\};?$/gm, '')
  .replaceAll('import.meta.url', 'self.location.href');
if (/^\s*(import|export)\b/m.test(classicGlue)) throw new Error('pkg/ringline.js: an import or export is left');
const workerSource = noScriptEnd('worker', `${classicGlue}\n${worker.slice(0, begin)}${loader}${worker.slice(end)}`);

const csp = [
  "default-src 'none'",
  `script-src ${hash(main)} 'wasm-unsafe-eval'`,
  'worker-src blob:',
  "connect-src 'none'",
  'img-src blob: data:',
  `style-src ${hash(css)}`,
  "base-uri 'none'",
  "form-action 'none'",
].join('; ');

const replace = (pattern, text) => {
  if (!pattern.test(html)) throw new Error(`index.html: ${pattern} not found`);
  html = html.replace(pattern, () => text);
};
replace(/<!-- ringline-csp:[^>]*-->\n<meta http-equiv="Content-Security-Policy" content="[^"]*">/,
  `<meta http-equiv="Content-Security-Policy" content="${csp}">`);
replace(/<link rel="stylesheet" href="style.css">/, `<style>${css}</style>`);
replace(/<!-- ringline-worker-source -->/, `<script type="text/plain" id="ringline-worker-source">${workerSource}</script>`);
replace(/<script type="module" src="main.js"><\/script>/, `<script type="module">${main}</script>`);

mkdirSync(dirname(out), { recursive: true });
writeFileSync(out, html);
