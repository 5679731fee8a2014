// Benchmark of the page in Debian's Chromium (not a test): time from navigation to a ready
// wasm core (median of 7 loads), and the analysis of the same files in the page's worker
// against the native `ringline analyze` (best of 5 each, same run). Usage, from the repo:
//   node scripts/bench/web.mjs SPIKES LAYOUT [SPIKES LAYOUT ...] [--voltage DIR]
// With --voltage DIR (DIR/bench.raw, bench.json, layout.csv as scripts/bench-voltage writes
// them), also the page's spike detection on that file (File.slice blocks in the worker)
// against `ringline analyze` on it, in MB/s.
import { execFileSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { basename, join, resolve } from 'node:path';
import { chromium } from '../../tests/browser/node_modules/playwright-core/index.mjs';
import { serve } from '../web/serve.mjs';

const repo = resolve(import.meta.dirname, '../..');
const cli = join(repo, 'target/release/ringline');
const FLAGS = ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
  '--disable-background-networking', '--disable-component-update', '--disable-sync'];
const median = (xs) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];

const server = await serve(join(repo, 'www'), 0);
const base = `http://127.0.0.1:${server.address().port}/`;
const browser = await chromium.launch({ executablePath: '/usr/bin/chromium', args: FLAGS });
const page = await browser.newPage();

const loads = [];
for (let k = 0; k < 7; k++) {
  await page.goto(base);
  await page.waitForFunction(() => window.ringlineCoreReadyAt !== undefined);
  loads.push(await page.evaluate(() => window.ringlineCoreReadyAt));
}
console.log(`navigation to ready core: median ${median(loads).toFixed(0)} ms (loads: ${loads.map((t) => t.toFixed(0)).join(', ')} ms)`);

const args = process.argv.slice(2);
const at = args.indexOf('--voltage');
const voltageDir = at >= 0 ? resolve(args[at + 1]) : null;
const pairs = at >= 0 ? args.slice(0, at) : args;
for (let i = 0; i + 1 < pairs.length; i += 2) {
  const [spikes, layout] = [resolve(pairs[i]), resolve(pairs[i + 1])];
  const native = [];
  for (let k = 0; k < 5; k++) {
    const t0 = performance.now();
    execFileSync(cli, ['analyze', spikes, '--layout', layout, '--json'], { stdio: ['ignore', 'ignore', 'ignore'] });
    native.push(performance.now() - t0);
  }
  const inPage = await page.evaluate(async ({ a, b }) => {
    const enc = new TextEncoder();
    const times = [];
    for (let k = 0; k < 5; k++) {
      const t0 = performance.now();
      await window.ringline.call('open', {
        activity: { name: a.name, bytes: enc.encode(a.text).buffer },
        layout: { name: b.name, bytes: enc.encode(b.text).buffer },
        settings: null,
      });
      await window.ringline.call('analyze', { analysis: null });
      times.push(performance.now() - t0);
    }
    return times;
  }, {
    a: { name: basename(spikes), text: readFileSync(spikes, 'utf8') },
    b: { name: basename(layout), text: readFileSync(layout, 'utf8') },
  });
  const best = (xs) => Math.min(...xs);
  console.log(`${spikes.replace(`${repo}/`, '')}: native ringline analyze ${best(native).toFixed(0)} ms, `
    + `page (worker: import, track, analysis) ${best(inPage).toFixed(0)} ms, ratio ${(best(inPage) / best(native)).toFixed(2)}`);
}
if (voltageDir) {
  const raw = join(voltageDir, 'bench.raw');
  const bytes = (await import('node:fs')).statSync(raw).size;
  const t0 = performance.now();
  execFileSync(cli, ['analyze', raw, '--layout', join(voltageDir, 'layout.csv'), '--json'], { stdio: ['ignore', 'ignore', 'ignore'] });
  const native = (performance.now() - t0) / 1000;
  await page.goto(base);
  await page.waitForFunction(() => window.ringlineCoreReadyAt !== undefined);
  const start = performance.now();
  await page.setInputFiles('#file-input', [raw, join(voltageDir, 'bench.json'), join(voltageDir, 'layout.csv')]);
  await page.locator('#electrode-table').waitFor({ state: 'visible', timeout: 600000 });
  const inPage = (performance.now() - start) / 1000;
  console.log(`voltage ${(bytes / 1e6).toFixed(0)} MB: native analyze ${native.toFixed(2)} s (${(bytes / 1e6 / native).toFixed(0)} MB/s); `
    + `page detection ${inPage.toFixed(2)} s (${(bytes / 1e6 / inPage).toFixed(0)} MB/s)`);
}
await browser.close();
server.close();
