// Benchmark of the page in Debian's Chromium (not a test): time from navigation to a ready
// wasm core (median of 7 loads), and the analysis of the same files in the page's worker
// against the native `ringline analyze` (best of 5 each, same run). Usage, from the repo:
//   node scripts/bench/web.mjs SPIKES LAYOUT [SPIKES LAYOUT ...]
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

const pairs = process.argv.slice(2);
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
await browser.close();
server.close();
