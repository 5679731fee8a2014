// End-to-end tests of the page in real Chromium (Debian's, driven by playwright-core). The
// reference for every number is the native command line, `ringline analyze`, on the same
// files: the page must show and export exactly what it prints and writes.
// Needs: scripts/build-web done, target/release/ringline built (scripts/test does both).
import { after, before, test } from 'node:test';
import assert from 'node:assert/strict';
import { execFileSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdirSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { basename, dirname, join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { chromium } from 'playwright-core';
import { serve } from '../../scripts/web/serve.mjs';

const repo = resolve(import.meta.dirname, '../..');
const artifacts = join(repo, 'tests/artifacts');
const cli = join(repo, 'target/release/ringline');
const demo = {
  spikes: join(repo, 'demo-data/strip-16/spikes.csv'),
  layout: join(repo, 'demo-data/strip-16/layout.csv'),
};
const CHROMIUM_FLAGS = [
  '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
  '--disable-background-networking', '--disable-component-update', '--disable-sync',
];

let browser;
let server;
let base;

before(async () => {
  mkdirSync(artifacts, { recursive: true });
  server = await serve(join(repo, 'www'), 0);
  base = `http://127.0.0.1:${server.address().port}/`;
  browser = await chromium.launch({ executablePath: '/usr/bin/chromium', args: CHROMIUM_FLAGS });
});

after(async () => {
  await browser?.close();
  server?.close();
});

/** `ringline analyze --json` and `--out` on the given files, run in their folder so that the
 * file names in the report are the bare names the page sees. */
function cliAnalysis(spikes, layout, extra = []) {
  const out = mkdtempSync(join(tmpdir(), 'ringline-cli-'));
  const json = execFileSync(cli, ['analyze', basename(spikes), '--layout', basename(layout), '--json', '--out', out, ...extra],
    { encoding: 'utf8', cwd: dirname(spikes), stdio: ['ignore', 'pipe', 'ignore'] });
  return { report: JSON.parse(json), out };
}

/** Opens a page, records every request it makes, and waits for the core. */
async function openPage(url, options = {}) {
  const context = await browser.newContext({ acceptDownloads: true, viewport: { width: 1100, height: 900 }, ...options });
  const page = await context.newPage();
  const requests = [];
  page.on('request', (r) => requests.push(r.url()));
  const errors = [];
  page.on('pageerror', (e) => errors.push(String(e)));
  await page.goto(url);
  await page.waitForFunction(() => window.ringlineCoreReadyAt !== undefined, null, { timeout: 20000 });
  return { page, context, requests, errors };
}

/** Drops files onto the drop zone as a user would (a real drop event with a DataTransfer). */
async function dropFiles(page, files) {
  const payload = files.map((f) => ({ name: f.name, text: f.text ?? readFileSync(f.path, 'utf8') }));
  await page.evaluate((list) => {
    const dt = new DataTransfer();
    for (const f of list) dt.items.add(new File([f.text], f.name, { type: 'text/csv' }));
    document.getElementById('drop-zone').dispatchEvent(new DragEvent('drop', { dataTransfer: dt, bubbles: true, cancelable: true }));
  }, payload);
}

/** The records of a CSV text (RFC 4180: quoted fields may hold commas and doubled quotes). */
function csvRecords(text) {
  const records = [];
  let record = [];
  let field = '';
  let quoted = false;
  for (let k = 0; k < text.length; k += 1) {
    const c = text[k];
    if (quoted) {
      if (c === '"' && text[k + 1] === '"') { field += '"'; k += 1; } else if (c === '"') quoted = false; else field += c;
    } else if (c === '"') quoted = true;
    else if (c === ',') { record.push(field); field = ''; } else if (c === '\n') { record.push(field); records.push(record); record = []; field = ''; } else if (c !== '\r') field += c;
  }
  if (field || record.length) { record.push(field); records.push(record); }
  return records;
}

async function analyse(page) {
  await page.locator('#step-bursts').waitFor({ state: 'visible' });
  await page.click('#analyze-button');
  await page.locator('#step-summary').waitFor({ state: 'visible', timeout: 60000 });
}

async function summaryValue(page, key) {
  return Number(await page.locator(`#summary-table td[data-key="${key}"]`).getAttribute('data-value'));
}

async function downloadText(page, selector) {
  const [download] = await Promise.all([page.waitForEvent('download'), page.click(selector)]);
  return readFileSync(await download.path(), 'utf8');
}

async function shoot(page, name) {
  await page.screenshot({ path: join(artifacts, `${name}.png`), fullPage: true });
}

test('the served page analyses the dropped demo files exactly as the command line does', async () => {
  const { report, out } = cliAnalysis(demo.spikes, demo.layout);
  const { page, context, requests, errors } = await openPage(base);
  const loadTimeMs = await page.evaluate(() => window.ringlineCoreReadyAt);
  console.log(`core ready ${loadTimeMs.toFixed(0)} ms after navigation`);
  await shoot(page, '0-start');
  const afterLoad = requests.length;

  await dropFiles(page, [
    { name: 'spikes.csv', path: demo.spikes },
    { name: 'layout.csv', path: demo.layout },
  ]);
  await page.locator('#fig-site_map').waitFor({ state: 'visible' });
  await shoot(page, '1-inputs-and-track');
  const fileRows = await page.locator('#file-table tbody tr').allTextContents();
  assert.equal(fileRows.length, 2);
  assert.match(fileRows.join('\n'), /spikes\.csv.*spike list.*imported/);
  assert.match(fileRows.join('\n'), /layout\.csv.*layout.*imported/);
  assert.match(await page.textContent('#track-text'), /track: line/);

  await analyse(page);
  // Median speed (mm/s) and burst count: the same numbers as `ringline analyze --json`.
  const median = await summaryValue(page, 'speed');
  assert.equal(median, report.summary.median_speed_mm_s);
  assert.equal(await summaryValue(page, 'bursts'), report.summary.burst_count);
  assert.equal(await summaryValue(page, 'failures'), report.summary.failure_count);
  await shoot(page, '2-results');
  // The README's picture of the page: the fronts step as a user sees it.
  await page.locator('#step-fronts h2').scrollIntoViewIfNeeded();
  await page.evaluate(() => document.getElementById('step-fronts').scrollIntoView());
  await page.screenshot({ path: join(artifacts, 'readme-fronts.png') });

  // Exports: byte for byte the files of `ringline analyze --out`.
  for (const [button, file] of [['fronts_csv', 'fronts.csv'], ['bursts_csv', 'bursts.csv'], ['activation_csv', 'activation.csv'], ['leaders_csv', 'leaders.csv'], ['summary_json', 'summary.json']]) {
    const text = await downloadText(page, `[data-export="${button}"]`);
    assert.equal(text, readFileSync(join(out, file), 'utf8'), `${file} differs from the command line's`);
  }
  // The rhythm and synchrony tables, through the bridge the Save buttons use (Chromium
  // dropped the eleventh of a quick run of downloads from one page in testing).
  const exported = Object.fromEntries(await page.evaluate(() => window.ringline.call('exports')));
  for (const file of ['spectrum.csv', 'sites.csv', 'sttc.csv', 'lags.csv']) {
    assert.equal(exported[file], readFileSync(join(out, file), 'utf8'), `${file} differs from the command line's`);
  }
  // Where bursts start and how fast they recruit: drawn by the core, saved as SVG.
  for (const [name, title] of [['leaders', 'Where bursts start'], ['recruitment', 'Recruitment of the active sites']]) {
    await page.locator(`#fig-${name}`).waitFor({ state: 'visible' });
    const text = await downloadText(page, `.svg-save[data-figure="${name}"]`);
    assert.ok(text.includes(title), `${name} figure lacks its title`);
  }
  // Rhythm and synchrony: the step's numbers are the command line's, and its four figures
  // save as SVG with their legends (and the matrix its colour bar with the unit).
  assert.match(await page.textContent('#rhythm-text'), new RegExp(`^Rhythm: spectrum peak at ${report.rhythm.peak_frequency_hz.toFixed(3)} Hz`));
  assert.match(await page.textContent('#lags-text'), new RegExp(`imply ${report.synchrony.lags.implied_speed_mm_s.toFixed(1)} mm/s`));
  assert.match(await page.textContent('#synchrony-text'), new RegExp(`^Synchrony: mean STTC ${report.synchrony.mean_sttc.toFixed(3)} \\(median [^)]*\\) over ${report.synchrony.pairs} site pairs`));
  // The page's paragraphs are the lines of the command line's text report.
  const cliText = execFileSync(cli, ['analyze', basename(demo.spikes), '--layout', basename(demo.layout)], { encoding: 'utf8', cwd: dirname(demo.spikes) });
  const rhythmLine = cliText.split('\n').find((l) => l.startsWith('Rhythm')).replace(/^Rhythm\s+/, '');
  assert.equal(await page.textContent('#rhythm-text'), `Rhythm: ${rhythmLine}.`);
  for (const [name, expected] of [['rate_spectrum', /Poisson floor, 2 x mean rate/], ['site_frequencies', /network bursts \(1 \/ median interval\)/],
    ['sttc_matrix', /STTC \(no unit; grey: undefined\)/], ['lags', /implied speed/]]) {
    await page.locator(`#fig-${name}`).waitFor({ state: 'visible' });
    // The SVG its Save button writes (read from the page, not downloaded: see above).
    const text = await page.evaluate((n) => window.ringline.state.svgs[n], name);
    assert.match(text, expected, `${name} figure lacks its legend`);
  }
  await shoot(page, '2b-rhythm');
  // An SVG export is a standalone SVG document with the axis units.
  const svg = await downloadText(page, '.svg-save[data-figure="activation"]');
  assert.match(svg, /^<svg[^>]*xmlns="http:\/\/www.w3.org\/2000\/svg"/);
  assert.match(svg, /activation time after [0-9.]+ s \(ms\)/);
  assert.match(svg, /position along the track \(µm\)/);

  // Stepping through bursts with the keyboard changes the shown front.
  const firstText = await page.textContent('#front-text');
  await page.locator('body').click({ position: { x: 5, y: 5 } });
  await page.keyboard.press('ArrowRight');
  await page.waitForFunction(() => document.getElementById('burst-number').value === '2');
  await page.waitForFunction((t) => document.getElementById('front-text').textContent !== t, firstText);
  const second = report.bursts[1];
  assert.match(await page.textContent('#front-text'), new RegExp(`^Burst 2 \\(${second.start_s.toFixed(3)} s`));

  // The read-out names the site under the pointer. Find a point through the page's bridge
  // (figure pixels), then move the real pointer there and wait for the read-out line.
  await page.waitForFunction(() => JSON.parse(document.getElementById('fig-activation').dataset.view ?? '{}').burst === 2);
  const hit = await page.evaluate(async () => {
    const img = document.getElementById('fig-activation');
    const width = Number(img.dataset.widthPx);
    const height = Number(img.dataset.heightPx);
    for (let y = 30; y < height - 40; y += 3) {
      for (let x = 70; x < width - 10; x += 3) {
        const label = await window.ringline.call('readout', { x, y });
        if (label) return { x, y, label, width, height };
      }
    }
    return null;
  });
  assert.ok(hit, 'no read-out anywhere over the activation figure');
  await page.locator('#fig-activation').scrollIntoViewIfNeeded();
  const box = await page.locator('#fig-activation').boundingBox();
  await page.mouse.move(box.x + hit.x * box.width / hit.width, box.y + hit.y * box.height / hit.height);
  await page.waitForFunction((t) => document.getElementById('readout').textContent === t, hit.label);
  const label = hit.label;
  const [, site, along, ms] = label.match(/^site (\S+): (-?[0-9]+) µm, (-?[0-9.]+) ms/);
  const activation = second.activations.find((a) => a.site === site);
  assert.ok(activation, `the read-out names site ${site}, which is not in burst 2`);
  assert.equal(Number(along), Math.round(activation.along_um));
  assert.ok(Math.abs(Number(ms) - (activation.time_s - second.start_s) * 1e3) < 0.006);
  await shoot(page, '3-fronts-burst-2');

  // Nothing but the page's own files was requested, and nothing at all after the load.
  const network = requests.slice(afterLoad).filter((u) => !u.startsWith('blob:') && !u.startsWith('data:'));
  assert.deepEqual(network, [], 'the page made requests after load');
  assert.ok(requests.every((u) => u.startsWith(base) || u.startsWith('blob:') || u.startsWith('data:')), `requests left the page: ${requests}`);
  assert.deepEqual(errors, []);
  await context.close();
});

test('the single-file page opened from disk analyses the demo the same way, with no request', async () => {
  const { report } = cliAnalysis(demo.spikes, demo.layout);
  const file = pathToFileURL(join(repo, 'www/dist/ringline.html')).href;
  const { page, context, requests, errors } = await openPage(file);
  await page.click('#demo-button');
  await analyse(page);
  assert.equal(await summaryValue(page, 'speed'), report.summary.median_speed_mm_s);
  assert.equal(await summaryValue(page, 'bursts'), report.summary.burst_count);
  await shoot(page, '4-single-file');
  assert.deepEqual(requests.filter((u) => !u.startsWith('blob:') && !u.startsWith('data:') && u !== file), []);
  assert.deepEqual(errors, []);
  await context.close();
});

test('a malformed file shows its located message, and a good file still works after it', async () => {
  const { page, context } = await openPage(base);
  const bad = 'site,time_s\nE1,0.5\nE2,half a second\n';
  await dropFiles(page, [{ name: 'bad-spikes.csv', text: bad }, { name: 'layout.csv', path: demo.layout }]);
  await page.locator('#input-error').waitFor({ state: 'visible' });
  const message = await page.textContent('#input-error');
  // The same sentence the command line prints for this file.
  const dir = mkdtempSync(join(tmpdir(), 'ringline-bad-'));
  writeFileSync(join(dir, 'bad-spikes.csv'), bad);
  let cliMessage = '';
  try {
    execFileSync(cli, ['analyze', join(dir, 'bad-spikes.csv'), '--layout', demo.layout], { cwd: dir, encoding: 'utf8', stdio: 'pipe' });
  } catch (e) {
    cliMessage = e.stderr;
  }
  assert.match(message, /bad-spikes\.csv/);
  assert.match(message, /line 3/);
  assert.ok(cliMessage.includes(message.replace(/^.*?bad-spikes\.csv/, '')), `page: ${message}\ncli: ${cliMessage}`);
  assert.match(await page.textContent('#file-table'), /not imported|line 3/);
  await shoot(page, '5-bad-file');

  await dropFiles(page, [{ name: 'spikes.csv', path: demo.spikes }]);
  await analyse(page);
  assert.ok(await page.locator('#input-error').isHidden());
  assert.ok((await summaryValue(page, 'bursts')) > 0);
  await context.close();
});

test('the bad-input corpus dropped on the page gives each file\'s located message, and good files still work after', async () => {
  // tests/bad-inputs/cases.tsv: every `analyze FILE --layout LAYOUT` case refused at import,
  // with the place the command line names (file, line, column, site).
  const corpus = join(repo, 'tests/bad-inputs');
  const cases = readFileSync(join(corpus, 'cases.tsv'), 'utf8').split('\n')
    .filter((l) => l && !l.startsWith('#'))
    .map((l) => l.split('\t'))
    .map(([name, args, exit, place, words]) => ({ name, args: args.split(' '), exit, place, words }))
    .filter((c) => c.exit === '2' && c.args.length === 6 && c.args[0] === 'analyze' && c.args[4] === '--out'
      && (c.place.startsWith(c.args[1]) || c.place.startsWith(c.args[3]) || c.place.startsWith(c.args[1].replace(/\.raw$/, '.json')))
      && !c.words.startsWith('the events span'));
  assert.ok(cases.length >= 40, `${cases.length} import cases`);
  const { page, context, errors } = await openPage(base);
  const seen = [];
  const failures = [];
  for (const c of cases) {
    await page.reload();
    await page.waitForFunction(() => window.ringlineCoreReadyAt !== undefined, null, { timeout: 20000 });
    const files = [c.args[1], c.args[3]];
    const sidecar = c.args[1].replace(/\.raw$/, '.json');
    if (sidecar !== c.args[1]) {
      try { readFileSync(join(corpus, sidecar)); files.push(sidecar); } catch { /* no sidecar: the case */ }
    }
    await page.setInputFiles('#file-input', files.map((f) => join(corpus, f)));
    const shown = await page.locator('#input-error').waitFor({ state: 'visible', timeout: 10000 }).then(() => true, () => false);
    // Raw samples without their sidecar are not an error in the page: it waits for the
    // sidecar to be dropped, and says so in the file table.
    const message = shown ? await page.textContent('#input-error')
      : c.name === 'raw-no-sidecar' && (await page.textContent('#file-table')).includes('now add its sidecar') ? c.place
        : '(no message)';
    if (!message.includes(c.place)) failures.push(`${c.name}: expected '${c.place}' in the page's '${message}'`);
    seen.push(c.name);
  }
  assert.deepEqual(failures, []);
  await page.setInputFiles('#file-input', ['good-spikes.csv', 'good-layout.csv'].map((f) => join(corpus, f)));
  await analyse(page);
  assert.ok(await page.locator('#input-error').isHidden());
  assert.equal(errors.length, 0, errors.join('\n'));
  await context.close();
});

test('a saved notebook re-opens with the same settings and results', async () => {
  const { page, context } = await openPage(base);
  await page.click('#demo-button');
  await page.locator('#step-bursts').waitFor({ state: 'visible' });
  await page.fill('#burst-form [name=resamples]', '300');
  await page.fill('#burst-form [name=seed]', '7');
  await page.selectOption('#burst-form [name=estimator]', 'huber');
  await analyse(page);
  const median = await summaryValue(page, 'speed');
  const summaryText = await page.textContent('#summary-table');
  const notebook = await downloadText(page, '#save-notebook');
  assert.ok(await page.isHidden('#notebook-note'), 'a notebook that holds its files has nothing to say');
  const parsed = JSON.parse(notebook);
  assert.equal(parsed.schema, 2);
  assert.equal(parsed.detected_from, undefined);
  assert.equal(parsed.settings.analysis.fronts.resamples, 300);
  assert.equal(parsed.results.summary.median_speed_mm_s, median);
  // The SHA-256 of the embedded file is that of the demo file (FIPS 180-4 digest by node:crypto).
  const { createHash } = await import('node:crypto');
  assert.equal(parsed.files[0].sha256, createHash('sha256').update(readFileSync(demo.spikes)).digest('hex'));

  await page.reload();
  await page.waitForFunction(() => window.ringlineCoreReadyAt !== undefined);
  await dropFiles(page, [{ name: 'demo.ringline.json', text: notebook }]);
  await page.locator('#step-summary').waitFor({ state: 'visible', timeout: 60000 });
  assert.equal(await page.inputValue('#burst-form [name=resamples]'), '300');
  assert.equal(await page.inputValue('#burst-form [name=seed]'), '7');
  assert.equal(await page.inputValue('#burst-form [name=estimator]'), 'huber');
  assert.equal(await summaryValue(page, 'speed'), median);
  assert.equal(await page.textContent('#summary-table'), summaryText);
  await context.close();
});

test('a panic in the core is shown as an error, and the page goes on working', async () => {
  const { page, context, errors } = await openPage(base);
  await page.click('#demo-button');
  await page.locator('#step-bursts').waitFor({ state: 'visible' });
  const failure = await page.evaluate(() => window.ringline.call('panic').then(() => null, (e) => e.message));
  assert.match(failure, /stopped unexpectedly.*deliberate panic/s);
  await page.waitForFunction(() => document.getElementById('core-status').textContent.includes('restarted'));
  await analyse(page);
  assert.ok((await summaryValue(page, 'bursts')) > 0);
  assert.deepEqual(errors, []);
  await context.close();
});

test('the simulator in the page writes the same bytes as the native command line', async () => {
  // The committed demo files are the native output (tests/demo_data.rs regenerates them).
  const scenario = readFileSync(join(repo, 'demo-data/scenarios/network-strip-16.json'), 'utf8');
  const { page, context } = await openPage(base);
  const files = await page.evaluate((text) => window.ringline.call('simulate', { scenario: text }), scenario);
  const names = files.map(([name]) => name).sort();
  assert.deepEqual(names, ['layout.csv', 'roi_layout.csv', 'spikes.csv', 'traces.csv', 'truth.json']);
  for (const [name, content] of files) {
    assert.ok(content === readFileSync(join(repo, 'demo-data/network-strip-16', name), 'utf8'), `${name} differs between wasm and native`);
  }
  await context.close();
});

test('a culture simulated in the page gives the command line\'s files and analysis', async () => {
  const out = mkdtempSync(join(tmpdir(), 'ringline-culture-'));
  execFileSync(cli, ['simulate', '--pattern', 'strip', '--length-um', '3000', '--density', '1000', '--duration', '20', '--seed', '2', '--out', out], { stdio: 'ignore' });
  const { report } = cliAnalysis(join(out, 'spikes.csv'), join(out, 'layout.csv'));
  const { page, context, errors } = await openPage(base);
  await page.click('#simulator summary');
  await page.selectOption('#sim-form select[name=shape]', 'strip');
  await page.fill('#sim-form input[name=length_um]', '3000');
  await page.fill('#sim-form input[name=density_per_mm2]', '1000');
  await page.fill('#sim-form input[name=duration_s]', '20');
  await page.fill('#sim-form input[name=seed]', '2');
  await page.click('#sim-button');
  await page.locator('#fig-site_map').waitFor({ state: 'visible', timeout: 60000 });
  for (const name of ['spikes.csv', 'layout.csv', 'truth.json', 'scenario.json']) {
    const text = await page.evaluate((n) => window.ringline.state.simulated[n], name);
    assert.ok(text === readFileSync(join(out, name), 'utf8'), `${name} differs between the page and the command line`);
  }
  assert.match(await page.textContent('#sim-result-text'), /^Simulated \d+ neurons for 20 s: \d+ spikes, \d+ bursts\.$/);
  await analyse(page);
  assert.equal(await summaryValue(page, 'speed'), report.summary.median_speed_mm_s);
  assert.equal(await summaryValue(page, 'bursts'), report.summary.burst_count);
  // Beside the truth: the rows and numbers of `ringline analyze --truth`.
  const withTruth = JSON.parse(execFileSync(cli, ['analyze', 'spikes.csv', '--layout', 'layout.csv', '--truth', 'truth.json', '--json'],
    { encoding: 'utf8', cwd: out, stdio: ['ignore', 'pipe', 'ignore'] })).truth;
  await page.locator('#truth-block').waitFor({ state: 'visible' });
  assert.equal(await page.locator('#truth-table tbody tr').count(), withTruth.rows.length);
  assert.match(await page.textContent('#truth-text'),
    new RegExp(`^${withTruth.true_fronts} true fronts, ${withTruth.measured} measured; median speed ${withTruth.median_speed_mm_s.toFixed(1)} mm/s against ${withTruth.median_true_speed_mm_s.toFixed(1)} mm/s true`));
  await shoot(page, '7-simulated-culture');
  assert.deepEqual(errors, []);
  await context.close();
});

/** Interleaved int16 voltage: 12 electrodes in a row 250 µm apart, noise SD 20 units, fronts at
 * 50 mm/s every 2 to 3 s with 3 spikes per electrode (trough -180 units); channel 4 is flat.
 * Seeded (mulberry32), so the file is the same on every run. */
function syntheticVoltage(seconds, fs = 20000, channels = 12) {
  let seed = 12345;
  const random = () => {
    seed = (seed + 0x6D2B79F5) | 0;
    let t = Math.imul(seed ^ (seed >>> 15), 1 | seed);
    t = (t + Math.imul(t ^ (t >>> 7), 61 | t)) ^ t;
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  const gauss = () => Math.sqrt(-2 * Math.log(1 - random())) * Math.cos(2 * Math.PI * random());
  const frames = Math.round(seconds * fs);
  const v = new Float64Array(frames * channels);
  for (let i = 0; i < v.length; i++) v[i] = 20 * gauss();
  const wave = (t) => -Math.exp(-0.5 * (t / 1.5e-4) ** 2) + 0.35 * Math.exp(-0.5 * ((t - 5e-4) / 3e-4) ** 2);
  for (let t0 = 1; t0 < seconds - 1; t0 += 2 + random()) {
    for (let c = 0; c < channels; c++) {
      for (let s = 0; s < 3; s++) {
        const centre = (t0 + (c * 250) / 50e3 + s * 0.008) * fs;
        for (let k = Math.floor(centre) - 20; k < Math.floor(centre) + 40; k++) {
          if (k >= 0 && k < frames) v[k * channels + c] += 180 * wave((k - centre) / fs);
        }
      }
    }
  }
  const out = new Int16Array(v.length);
  for (let i = 0; i < v.length; i++) out[i] = (i % channels === 3) ? 0 : Math.max(-32768, Math.min(32767, Math.round(v[i])));
  return { samples: out, fs, channels };
}

function wavBytes({ samples, fs, channels }) {
  const data = Buffer.from(samples.buffer);
  const header = Buffer.alloc(44);
  header.write('RIFF', 0);
  header.writeUInt32LE(36 + data.length, 4);
  header.write('WAVEfmt ', 8);
  header.writeUInt32LE(16, 16);
  header.writeUInt16LE(1, 20);
  header.writeUInt16LE(channels, 22);
  header.writeUInt32LE(fs, 24);
  header.writeUInt32LE(fs * 2 * channels, 28);
  header.writeUInt16LE(2 * channels, 32);
  header.writeUInt16LE(16, 34);
  header.write('data', 36);
  header.writeUInt32LE(data.length, 40);
  return Buffer.concat([header, data]);
}

test('raw voltage dropped on the page gives the command line\'s electrodes and speeds', async () => {
  const dir = mkdtempSync(join(tmpdir(), 'ringline-voltage-'));
  const voltage = syntheticVoltage(30);
  writeFileSync(join(dir, 'culture.wav'), wavBytes(voltage));
  writeFileSync(join(dir, 'culture.raw'), Buffer.from(voltage.samples.buffer));
  writeFileSync(join(dir, 'culture.json'), JSON.stringify({ sample_rate_hz: 20000, channels: 12, sample_type: 'int16', scale_uv: 1 }));
  writeFileSync(join(dir, 'layout.csv'), `site,x_um,y_um\n${Array.from({ length: 12 }, (_, c) => `E${c + 1},${c * 250},0`).join('\n')}\n`);
  const { report } = cliAnalysis(join(dir, 'culture.wav'), join(dir, 'layout.csv'));
  assert.ok(Math.abs(report.summary.median_speed_mm_s / 50 - 1) < 0.05, `CLI speed ${report.summary.median_speed_mm_s}`);
  for (const files of [['culture.wav', 'layout.csv'], ['culture.raw', 'culture.json', 'layout.csv']]) {
    const { page, context, errors } = await openPage(base);
    await page.setInputFiles('#file-input', files.map((f) => join(dir, f)));
    await page.locator('#electrode-table').waitFor({ state: 'visible', timeout: 60000 });
    const statuses = await page.locator('#electrode-table tbody tr td:last-child').allTextContents();
    assert.deepEqual(statuses, report.electrodes.map((e) => e.status.replaceAll('_', ' ')));
    assert.equal(statuses[3], 'flat');
    await analyse(page);
    assert.equal(await summaryValue(page, 'speed'), report.summary.median_speed_mm_s, files.join(' + '));
    assert.equal(await summaryValue(page, 'bursts'), report.summary.burst_count);
    if (files[0].endsWith('.wav')) await shoot(page, '6-voltage');
    // The evidence behind the spike times: voltage read again from the file around them.
    await page.locator('#fig-evidence').waitFor({ state: 'visible' });
    await page.selectOption('#evidence-site', 'E2');
    await page.waitForFunction(() => /site E2 \(band-passed\)/.test(window.ringline.state.svgs.evidence ?? ''));
    assert.match(await page.evaluate(() => window.ringline.state.svgs.evidence), /detection threshold/);
    // The report of a voltage recording names the voltage file by its SHA-256.
    const html = await page.evaluate(() => window.ringline.call('reportHtml'));
    const digest = createHash('sha256').update(readFileSync(join(dir, files[0]))).digest('hex');
    assert.ok(html.includes(`<td>${files[0]}</td>`) && html.includes(digest), 'the voltage file and its SHA-256');
    if (files[0].endsWith('.wav')) {
      // A notebook holds the detected spikes, not the voltage: saving says so, naming the file
      // and its size, and the notebook names it by SHA-256. It re-opens on its own, with the
      // same speed, and its report names the voltage file as the first one did.
      const notebook = await downloadText(page, '#save-notebook');
      const note = page.locator('#notebook-note');
      await note.waitFor({ state: 'visible' });
      const size = readFileSync(join(dir, 'culture.wav')).length;
      assert.equal(await note.textContent(),
        `The notebook holds the spikes detected in culture.wav (${(size / 1048576).toFixed(1)} MiB) and names that file by its SHA-256, not the voltage: `
        + 'it re-opens on its own; to see the voltage around the spikes, open that file itself.');
      const parsed = JSON.parse(notebook);
      assert.deepEqual(parsed.detected_from, { role: 'voltage', name: 'culture.wav', size_bytes: size, sha256: digest });
      writeFileSync(join(dir, 'culture.ringline.json'), notebook);
      const again = await openPage(base);
      await again.page.setInputFiles('#file-input', [join(dir, 'culture.ringline.json')]);
      await again.page.locator('#step-summary').waitFor({ state: 'visible', timeout: 60000 });
      assert.equal(await summaryValue(again.page, 'speed'), report.summary.median_speed_mm_s, 'the notebook re-opened');
      const reopened = await again.page.evaluate(() => window.ringline.call('reportHtml'));
      assert.ok(reopened.includes('<td>culture.wav</td>') && reopened.includes(digest), 'the re-opened report names the voltage file');
      assert.deepEqual(again.errors, []);
      await again.context.close();
    }
    assert.deepEqual(errors, []);
    await context.close();
  }
});

test('a study of 6 recordings dropped with its manifest gives the command line\'s study tables', async () => {
  // Six simulated recordings (three scenarios, two seeds), one folder, distinct file names.
  const dir = mkdtempSync(join(tmpdir(), 'ringline-study-'));
  let manifest = 'recording,data,layout,culture,condition\n';
  const files = [];
  for (const scenario of ['strip-16', 'ring-24', 'dish-8x8']) {
    for (const seed of [1, 2]) {
      const name = `${scenario}-${seed}`;
      const sim = join(dir, name);
      execFileSync(cli, ['simulate', join(repo, `demo-data/scenarios/${scenario}.json`), '--seed', String(seed), '--duration', '60', '--out', sim],
        { stdio: 'ignore' });
      for (const kind of ['spikes', 'layout']) {
        writeFileSync(join(dir, `${name}-${kind}.csv`), readFileSync(join(sim, `${kind}.csv`)));
        files.push({ name: `${name}-${kind}.csv`, path: join(dir, `${name}-${kind}.csv`) });
      }
      manifest += `${name},${name}-spikes.csv,${name}-layout.csv,culture ${seed},"${scenario}, seed ${seed}"\n`;
    }
  }
  writeFileSync(join(dir, 'study.csv'), manifest);
  execFileSync(cli, ['batch', 'study.csv', '--out', 'batch'], { cwd: dir, stdio: 'ignore' });

  const { page, context, errors } = await openPage(base);
  await dropFiles(page, [{ name: 'study.csv', text: manifest }, ...files]);
  await page.locator('#study').waitFor({ state: 'visible' });
  assert.equal(await page.locator('#study-table tbody tr').count(), 6);
  assert.match(await page.textContent('#study-table tbody'), /not analysed yet/);
  await page.click('#study-run');
  await page.waitForFunction(() => !document.getElementById('study-save').disabled, null, { timeout: 120000 });
  await shoot(page, '9-study');
  const rows = await page.locator('#study-table tbody tr').allTextContents();
  assert.ok(rows.every((r) => r.includes('analysed')), rows.join('\n'));
  // The study table's counts and speeds are those of `ringline batch`'s recordings.csv.
  const [header, ...records] = csvRecords(readFileSync(join(dir, 'batch', 'recordings.csv'), 'utf8'));
  const col = (name) => header.indexOf(name);
  const cells = await page.$$eval('#study-table tbody tr', (trs) => trs.map((tr) => [...tr.cells].map((c) => c.textContent)));
  assert.deepEqual(await page.$$eval('#study-table thead th', (ths) => ths.map((th) => th.textContent)),
    ['recording', 'culture', 'condition', 'status', 'bursts', 'fronts', 'median speed (mm/s) [95% CI]', '']);
  records.forEach((r, i) => {
    assert.deepEqual(cells[i].slice(0, 6), [r[col('recording')], r[col('culture')], r[col('condition')], 'analysed', r[col('burst_count')], r[col('front_count')]]);
    const [low, high] = [r[col('median_speed_ci95_low_mm_s')], r[col('median_speed_ci95_high_mm_s')]].map((v) => Number(v).toFixed(1));
    assert.equal(cells[i][6], `${Number(r[col('median_speed_mm_s')]).toFixed(1)} [${low}, ${high}]`, r[col('recording')]);
  });
  assert.match(await page.textContent('#study-text'), /^6 recordings from study\.csv; 6 analysed or tried, 0 failed\./);

  const saved = {};
  page.on('download', async (d) => { saved[d.suggestedFilename()] = readFileSync(await d.path(), 'utf8'); });
  await page.click('#study-save');
  for (let k = 0; k < 100 && Object.keys(saved).length < 4; k += 1) await page.waitForTimeout(100);
  for (const table of ['status.csv', 'recordings.csv', 'bursts.csv', 'fronts.csv']) {
    assert.equal(saved[table], readFileSync(join(dir, 'batch', table), 'utf8'), `${table} differs from ringline batch`);
  }

  // Comparing conditions (here the two cultures, three recordings each): the page's
  // comparisons.csv and estimation plot are the bytes `ringline compare` writes.
  execFileSync(cli, ['compare', 'batch', '--by', 'culture'], { cwd: dir, stdio: 'ignore' });
  await page.selectOption('#compare-form select[name="by"]', 'culture');
  await page.click('#compare-button');
  await page.locator('#compare-results').waitFor({ state: 'visible' });
  await page.locator('#fig-estimation').waitFor({ state: 'visible' });
  assert.match(await page.textContent('#compare-text'), /^Conditions culture 1, culture 2 \(not ordered\)/);
  const comparedFiles = Object.fromEntries(await page.evaluate(() => window.ringline.state.comparison.files));
  assert.equal(comparedFiles['comparisons.csv'], readFileSync(join(dir, 'batch', 'comparisons.csv'), 'utf8'));
  assert.equal(comparedFiles['estimation-median_speed_mm_s.svg'], readFileSync(join(dir, 'batch', 'estimation-median_speed_mm_s.svg'), 'utf8'));
  assert.equal(await page.locator('#compare-table tbody tr').count(), 8);
  await shoot(page, '9b-compare');

  // The notebook keeps the study: re-opened in a fresh page, the study table and its saved
  // tables come back without the recordings.
  await page.getByRole('button', { name: 'Open recording strip-16-1 in the steps below' }).click();
  await analyse(page);
  const notebook = await downloadText(page, '#save-notebook');
  assert.equal(JSON.parse(notebook).study.recordings.length, 6);
  const second = await openPage(base);
  await dropFiles(second.page, [{ name: 'study.ringline.json', text: notebook }]);
  await second.page.locator('#study').waitFor({ state: 'visible' });
  await second.page.waitForFunction(() => !document.getElementById('study-save').disabled);
  const again = {};
  second.page.on('download', async (d) => { again[d.suggestedFilename()] = readFileSync(await d.path(), 'utf8'); });
  await second.page.click('#study-save');
  for (let k = 0; k < 100 && Object.keys(again).length < 4; k += 1) await second.page.waitForTimeout(100);
  assert.equal(again['recordings.csv'], saved['recordings.csv']);
  await second.context.close();

  // Opening one recording shows it in the steps below, with the command line's exports.
  await page.getByRole('button', { name: 'Open recording ring-24-2 in the steps below' }).click();
  await analyse(page);
  const summary = JSON.parse(readFileSync(join(dir, 'batch/recordings/ring-24-2/summary.json'), 'utf8'));
  assert.equal(await summaryValue(page, 'speed'), summary.summary.median_speed_mm_s);
  const fronts = await downloadText(page, '[data-export="fronts_csv"]');
  assert.equal(fronts, readFileSync(join(dir, 'batch/recordings/ring-24-2/fronts.csv'), 'utf8'));
  assert.deepEqual(errors, []);
  await context.close();
});

test('an ordered calcium series compared in the page shows its rising speed, as the command line', async () => {
  // Nine simulated strips: three calcium levels (the column calcium_mM, so ordered), three
  // cultures each with its own speed factor. Truth: front speeds 25, 32 and 40 mm/s times
  // the culture's factor, so the level effects are near 7 and 15 mm/s.
  const dir = mkdtempSync(join(tmpdir(), 'ringline-calcium-'));
  const levels = [['0.5', 25], ['1', 32], ['2', 40]];
  const factors = [0.94, 1.0, 1.05];
  let manifest = 'recording,data,layout,culture,calcium_mM\n';
  const files = [];
  levels.forEach(([level, speed], l) => {
    factors.forEach((factor, c) => {
      const name = `ca${l}-c${c}`;
      const scenario = join(dir, `${name}.json`);
      writeFileSync(scenario, JSON.stringify({
        model: 'fronts', name, seed: 10 * l + c + 1, duration_s: 60,
        electrodes: { shape: 'row', count: 16, pitch_um: 375, angle_deg: 0 },
        pattern: 'mixed', min_interval_s: 4, extra_interval_s: 6, speed_mm_s: speed * factor, speed_cv: 0.1,
        activation_jitter_s: 0.002, spikes_per_burst: 6, burst_spread_s: 0.02, background_rate_hz: 0.3,
        failure_probability: 0.1, sampling_rate_hz: 25000,
      }));
      execFileSync(cli, ['simulate', scenario, '--out', join(dir, name)], { stdio: 'ignore' });
      for (const kind of ['spikes', 'layout']) {
        writeFileSync(join(dir, `${name}-${kind}.csv`), readFileSync(join(dir, name, `${kind}.csv`)));
        files.push({ name: `${name}-${kind}.csv`, path: join(dir, `${name}-${kind}.csv`) });
      }
      manifest += `${name},${name}-spikes.csv,${name}-layout.csv,culture ${l}-${c},${level}\n`;
    });
  });
  writeFileSync(join(dir, 'study.csv'), manifest);
  const metrics = 'median_speed_mm_s,speed_mm_s';
  execFileSync(cli, ['compare', 'study.csv', '--out', 'cli', '--by', 'calcium_mM', '--unit', 'culture', '--metrics', metrics,
    '--report', 'study-report.html'], { cwd: dir, stdio: 'ignore' });

  const { page, context, errors } = await openPage(base);
  await dropFiles(page, [{ name: 'study.csv', text: manifest }, ...files]);
  await page.locator('#study').waitFor({ state: 'visible' });
  await page.click('#study-run');
  await page.waitForFunction(() => !document.getElementById('study-save').disabled, null, { timeout: 120000 });
  await page.selectOption('#compare-form select[name="by"]', 'calcium_mM');
  await page.selectOption('#compare-form select[name="unit"]', 'culture');
  await page.fill('#compare-form input[name="metrics"]', metrics);
  await page.click('#compare-button');
  await page.locator('#fig-levels').waitFor({ state: 'visible' });
  assert.match(await page.textContent('#compare-text'), /^Conditions 0\.5, 1, 2 \(ordered\)/);
  const compared = await page.evaluate(() => window.ringline.state.comparison);
  const files2 = Object.fromEntries(compared.files);
  for (const name of ['comparisons.csv', 'estimation-median_speed_mm_s.svg', 'levels-median_speed_mm_s.svg', 'levels-speed_mm_s.svg']) {
    assert.equal(files2[name], readFileSync(join(dir, 'cli', name), 'utf8'), `${name} differs from ringline compare`);
  }
  // The study report: the command line's bytes, saved from the page.
  const report = await downloadText(page, '#compare-report');
  assert.equal(report, readFileSync(join(dir, 'study-report.html'), 'utf8'), 'the study report differs from ringline compare --report');
  // The ordered change against the truth: both effects positive and rising, each interval
  // holding its true difference, and the trend test's exact p small (3 ordered groups of 3:
  // a perfect order has two-sided p 2/1680; Jonckheere 1954).
  const speed = compared.report.comparisons.filter((c) => c.metric === 'median_speed_mm_s');
  const truth = [32 - 25, 40 - 25];
  for (const [k, c] of speed.slice(0, 2).entries()) {
    assert.ok(c.effect_ci[0] <= truth[k] && truth[k] <= c.effect_ci[1], `${c.effect} ${c.effect_ci} against ${truth[k]}`);
  }
  assert.ok(speed[1].effect > speed[0].effect && speed[0].effect > 0);
  assert.equal(speed[2].test, 'jonckheere_terpstra');
  assert.ok(speed[2].outcome.p < 0.01, `trend p ${speed[2].outcome.p}`);
  const fronts = compared.report.comparisons.filter((c) => c.metric === 'speed_mm_s');
  assert.equal(fronts[0].values, 'nested_fronts');
  assert.match(await page.textContent('#compare-table'), /every front, nested/);
  await page.selectOption('#compare-metric', 'speed_mm_s');
  await shoot(page, '9c-calcium-series');
  const svg = await downloadText(page, '#levels-save');
  assert.equal(svg, files2['levels-speed_mm_s.svg']);
  assert.deepEqual(errors, []);
  await context.close();
});

test('a stimulus protocol dropped with its recording gives the command line\'s response curves', async () => {
  // A blocked culture stimulated at eight amplitudes (the simulator writes the protocol
  // beside the recording): the page's curves.csv and responses.csv are the CLI's bytes.
  const dir = mkdtempSync(join(tmpdir(), 'ringline-stimuli-'));
  const scenario = {
    model: 'network', name: 'stimulated', seed: 5, duration_s: 125,
    pattern: { shape: 'strip', length_um: 3000, width_um: 300 }, density_per_mm2: 1500,
    connectivity: { footprint: 'gaussian', sigma_um: 150, mean_in_degree: 100 },
    neuron: { tau_m_s: 0.02, threshold_mv: 20, reset_mv: 10, refractory_s: 0.002 },
    drive: { mean_mv: 14, sd_mv: 1.5 }, noise: { rate_hz: 20, amplitude_mv: 1.0 },
    synapse: { excitatory_mv: 4.0, inhibitory_mv: 2.0, depression_u: 0.5, recovery_s: 3.0 },
    electrodes: { layout: { shape: 'row', count: 16, pitch_um: 187.5 }, offset_um: [93.75, 0], pickup_radius_um: 40,
      detection_probability: 1.0, sampling_rate_hz: 25000 },
    excitatory_scale: 0,
    stimulation: { threshold_mean: 1.0, threshold_sd: 0.2, amplitudes: [0.6, 0.75, 0.85, 0.95, 1.05, 1.15, 1.25, 1.4], repeats: 12, start_s: 25, interval_s: 1.0 },
  };
  writeFileSync(join(dir, 'scenario.json'), JSON.stringify(scenario));
  execFileSync(cli, ['simulate', 'scenario.json', '--out', 'sim'], { cwd: dir, stdio: 'ignore' });
  execFileSync(cli, ['analyze', 'sim/spikes.csv', '--layout', 'sim/layout.csv', '--stimuli', 'sim/stimuli.csv', '--out', 'out'],
    { cwd: dir, stdio: 'ignore' });
  const { page, context, errors } = await openPage(base);
  await dropFiles(page, ['spikes.csv', 'layout.csv', 'stimuli.csv'].map((n) => ({ name: n, path: join(dir, 'sim', n) })));
  // The file table fills in as each dropped file is classified.
  await page.waitForFunction(() => document.getElementById('file-table').textContent.includes('stimulus protocol'));
  await analyse(page);
  await page.locator('#step-response').waitFor({ state: 'visible' });
  await page.locator('#fig-response_curve').waitFor({ state: 'visible' });
  assert.match(await page.textContent('#response-text'), /^96 stimuli from stimuli\.csv/);
  assert.equal(await page.locator('#response-table tbody tr').count(), 8);
  const files = Object.fromEntries(await page.evaluate(() => window.ringline.call('exports')));
  for (const name of ['curves.csv', 'responses.csv']) {
    assert.equal(files[name], readFileSync(join(dir, 'out', name), 'utf8'), `${name} differs from ringline analyze`);
  }
  // One site's own curve beside the population's.
  await page.selectOption('#response-site', { index: 3 });
  await page.waitForFunction(() => /site e\d+/.test(window.ringline.state.svgs.response_curve ?? ''));
  await shoot(page, '10-response');
  // The notebook keeps the protocol: re-opened, the same curves come back.
  const notebook = await downloadText(page, '#save-notebook');
  assert.ok(JSON.parse(notebook).files.some((f) => f.role === 'stimuli'));
  const second = await openPage(base);
  await dropFiles(second.page, [{ name: 'stimulated.ringline.json', text: notebook }]);
  await second.page.locator('#step-response').waitFor({ state: 'visible', timeout: 60000 });
  const again = Object.fromEntries(await second.page.evaluate(() => window.ringline.call('exports')));
  assert.equal(again['curves.csv'], files['curves.csv']);
  await second.context.close();
  assert.deepEqual(errors, []);
  await context.close();
});

test('the demo blocker series as a study in the page gives the command line\'s tables and responses', async () => {
  // The demo study's four recordings with their protocols (the manifest's stimuli column),
  // copied under distinct names; the page's study tables equal `ringline batch`'s, and an
  // opened recording shows its responses.
  const dir = mkdtempSync(join(tmpdir(), 'ringline-series-'));
  let manifest = 'recording,data,layout,stimuli,blocked_fraction\n';
  const files = [];
  for (const [level, fraction] of [['40', '0.4'], ['60', '0.6'], ['75', '0.75'], ['100', '1']]) {
    for (const kind of ['spikes', 'layout', 'stimuli']) {
      const name = `blocker-${level}-${kind}.csv`;
      writeFileSync(join(dir, name), readFileSync(join(repo, `demo-data/blocker-${level}/${kind}.csv`)));
      files.push({ name, path: join(dir, name) });
    }
    manifest += `blocker-${level},blocker-${level}-spikes.csv,blocker-${level}-layout.csv,blocker-${level}-stimuli.csv,${fraction}\n`;
  }
  writeFileSync(join(dir, 'series.csv'), manifest);
  execFileSync(cli, ['batch', 'series.csv', '--out', 'batch'], { cwd: dir, stdio: 'ignore' });
  const { page, context, errors } = await openPage(base);
  await dropFiles(page, [{ name: 'series.csv', text: manifest }, ...files]);
  await page.locator('#study').waitFor({ state: 'visible' });
  await page.click('#study-run');
  await page.waitForFunction(() => !document.getElementById('study-save').disabled, null, { timeout: 120000 });
  const saved = {};
  page.on('download', async (d) => { saved[d.suggestedFilename()] = readFileSync(await d.path(), 'utf8'); });
  await page.click('#study-save');
  for (let k = 0; k < 100 && Object.keys(saved).length < 4; k += 1) await page.waitForTimeout(100);
  assert.equal(saved['recordings.csv'], readFileSync(join(dir, 'batch', 'recordings.csv'), 'utf8'));
  await page.getByRole('button', { name: 'Open recording blocker-40 in the steps below' }).click();
  await analyse(page);
  await page.locator('#step-response').waitFor({ state: 'visible' });
  const exported = Object.fromEntries(await page.evaluate(() => window.ringline.call('exports')));
  assert.equal(exported['curves.csv'], readFileSync(join(dir, 'batch/recordings/blocker-40/curves.csv'), 'utf8'));
  assert.deepEqual(errors, []);
  await context.close();
});

test('a notebook of schema 1 (the previous version) opens with its settings and results', async () => {
  const fixture = join(repo, 'tests/fixtures/notebook-schema-1.ringline.json');
  const old = JSON.parse(readFileSync(fixture, 'utf8'));
  const { page, context, errors } = await openPage(base);
  await dropFiles(page, [{ name: 'old.ringline.json', path: fixture }]);
  await page.locator('#step-summary').waitFor({ state: 'visible', timeout: 60000 });
  assert.equal(await page.inputValue('#burst-form [name=resamples]'), String(old.settings.analysis.fronts.resamples));
  // Re-analysed by today's core: the origin search's refinement now stops relative to its
  // bracket, which moved speeds by under 1e-7 relative (tests/page_core.rs compares to 1e-4).
  const speed = await summaryValue(page, 'speed');
  assert.ok(Math.abs(speed / old.results.summary.median_speed_mm_s - 1) < 1e-4, `${speed} against ${old.results.summary.median_speed_mm_s}`);
  assert.equal(await summaryValue(page, 'bursts'), old.results.summary.burst_count);
  assert.ok(await page.locator('#study').isHidden());
  assert.deepEqual(errors, []);
  await context.close();
});

test('the report saved from the page equals `ringline analyze --report` and opens from disk with no script and no request', async () => {
  const dir = mkdtempSync(join(tmpdir(), 'ringline-report-'));
  const cliReport = join(dir, 'cli-report.html');
  execFileSync(cli, ['analyze', basename(demo.spikes), '--layout', basename(demo.layout), '--report', cliReport],
    { cwd: dirname(demo.spikes), stdio: 'ignore' });
  const { report } = cliAnalysis(demo.spikes, demo.layout);
  const { page, context, errors } = await openPage(base);
  await dropFiles(page, [
    { name: 'spikes.csv', path: demo.spikes },
    { name: 'layout.csv', path: demo.layout },
  ]);
  await analyse(page);
  const html = await downloadText(page, '#save-report');
  assert.equal(html, readFileSync(cliReport, 'utf8'), 'the page\'s report differs from the command line\'s');
  assert.deepEqual(errors, []);
  await context.close();

  // Opened from file:// with JavaScript off: every table and figure shows, nothing is fetched.
  const saved = join(dir, 'page-report.html');
  writeFileSync(saved, html);
  const offline = await browser.newContext({ javaScriptEnabled: false, viewport: { width: 1000, height: 800 } });
  const view = await offline.newPage();
  const requests = [];
  view.on('request', (r) => requests.push(r.url()));
  const consoleErrors = [];
  view.on('console', (m) => { if (m.type() === 'error') consoleErrors.push(m.text()); });
  await view.goto(pathToFileURL(saved).href);
  await view.waitForLoadState('load');
  assert.deepEqual(requests, [pathToFileURL(saved).href], 'the report asked for something besides itself');
  assert.deepEqual(consoleErrors, []);
  const figures = await view.$$eval('figure img', (imgs) => imgs.map((i) => ({ ok: i.complete && i.naturalWidth > 0, alt: i.alt })));
  assert.ok(figures.length >= 12, `only ${figures.length} figures`);
  for (const f of figures) assert.ok(f.ok, `figure not shown: ${f.alt}`);
  // Every burst has its row in the (collapsed) table, and the summary states the CLI's count.
  const burstRows = await view.$$eval('details', (all) => all
    .find((d) => d.querySelector('summary').textContent.startsWith('Every burst'))
    .querySelectorAll('tbody tr').length);
  assert.equal(burstRows, report.summary.burst_count);
  assert.match(await view.textContent('table.facts'), new RegExp(`Bursts\\s*${report.summary.burst_count}`));
  assert.match(await view.textContent('body'), /not for clinical or diagnostic use/);
  await view.screenshot({ path: join(artifacts, 'report-from-disk.png'), fullPage: false });
  // Printed, the folded tables open, and the document lays out on A4 and Letter.
  const lastSetting = view.locator('details tbody tr').last();
  assert.equal(await lastSetting.isVisible(), false);
  await view.emulateMedia({ media: 'print' });
  assert.equal(await lastSetting.isVisible(), true);
  for (const format of ['A4', 'Letter']) {
    const pdf = await view.pdf({ path: join(artifacts, `report-${format}.pdf`), format });
    assert.ok(pdf.length > 10000);
  }
  await offline.close();
});

/** Waits until the page says it kept the session after `since` (ms, page clock). */
async function sessionKept(page) {
  await page.waitForFunction(() => /kept in this browser at/.test(document.getElementById('autosave-status').textContent), null, { timeout: 20000 });
}

async function keptFileCount(page) {
  return page.evaluate(() => new Promise((resolve, reject) => {
    const open = indexedDB.open('ringline-session', 1);
    open.onsuccess = () => {
      const count = open.result.transaction('files').objectStore('files').count();
      count.onsuccess = () => { open.result.close(); resolve(count.result); };
      count.onerror = () => reject(count.error);
    };
    open.onerror = () => reject(open.error);
  }));
}

test('the session is kept in the browser, offered after a reload with what and when, restored and cleared', async () => {
  const { page, context, errors } = await openPage(base);
  await page.click('#demo-button');
  await analyse(page);
  const speed = await summaryValue(page, 'speed');
  await page.fill('#burst-number', '3');
  await page.dispatchEvent('#burst-number', 'change');
  await page.waitForFunction(() => document.getElementById('burst-number').value === '3');
  await page.evaluate(() => { document.getElementById('autosave-status').textContent = ''; });
  await sessionKept(page);
  assert.equal(await keptFileCount(page), 2, 'the two files are kept once each');
  await page.evaluate(() => { document.getElementById('autosave-status').textContent = ''; });
  await page.click('#analyze-button'); // the same files analysed again: still kept once
  await sessionKept(page);
  assert.equal(await keptFileCount(page), 2);

  await page.reload();
  await page.waitForFunction(() => window.ringlineCoreReadyAt !== undefined);
  await page.locator('#restore').waitFor({ state: 'visible' });
  const offer = await page.textContent('#restore-text');
  assert.match(offer, /spikes\.csv \+ layout\.csv, analysed \(\d+ bursts\)/);
  assert.match(offer, new RegExp(String(new Date().getFullYear())));
  assert.equal(await page.evaluate(() => document.activeElement.id), 'restore-button');
  await page.keyboard.press('Enter');
  await page.locator('#step-summary').waitFor({ state: 'visible', timeout: 60000 });
  assert.equal(await summaryValue(page, 'speed'), speed);
  assert.equal(await page.inputValue('#burst-number'), '3');
  assert.equal(await page.evaluate(() => document.activeElement.id), 'summary-table');
  await shoot(page, 'restored-session');

  await page.reload();
  await page.waitForFunction(() => window.ringlineCoreReadyAt !== undefined);
  await page.locator('#restore').waitFor({ state: 'visible' });
  await page.click('#restore-clear');
  await page.waitForFunction(() => /cleared/.test(document.getElementById('autosave-status').textContent));
  assert.equal(await keptFileCount(page), 0);
  await page.reload();
  await page.waitForFunction(() => window.ringlineCoreReadyAt !== undefined);
  await page.waitForTimeout(500);
  assert.ok(await page.locator('#restore').isHidden());
  assert.deepEqual(errors, []);
  await context.close();
});

test('a full browser storage stops the autosave with a message and leaves the open session alone', async () => {
  const { page, context, errors } = await openPage(base);
  const cdp = await context.newCDPSession(page);
  await cdp.send('Storage.overrideQuotaForOrigin', { origin: new URL(base).origin, quotaSize: 1024 });
  await page.click('#demo-button');
  await analyse(page);
  await page.waitForFunction(() => /storage for the page is full/.test(document.getElementById('autosave-status').textContent), null, { timeout: 20000 });
  assert.ok((await summaryValue(page, 'speed')) > 0);
  await page.click('#next-burst');
  await page.waitForFunction(() => document.getElementById('burst-number').value === '2');
  assert.deepEqual(errors, []);
  await context.close();
});

test('the single file opened from disk keeps and restores its session', async () => {
  const { page, context, errors } = await openPage(pathToFileURL(join(repo, 'www/dist/ringline.html')).href);
  await page.click('#demo-button');
  await analyse(page);
  const speed = await summaryValue(page, 'speed');
  const status = await page.waitForFunction(() => {
    const t = document.getElementById('autosave-status').textContent;
    return /kept in this browser at|does not let the page keep/.test(t) && t;
  }, null, { timeout: 20000 });
  const said = await status.jsonValue();
  if (/does not let/.test(said)) {
    // Where the browser refuses storage to pages from disk, the page says so (and that is all).
    console.log(`single file: ${said}`);
  } else {
    await page.reload();
    await page.waitForFunction(() => window.ringlineCoreReadyAt !== undefined);
    await page.locator('#restore').waitFor({ state: 'visible' });
    await page.click('#restore-button');
    await page.locator('#step-summary').waitFor({ state: 'visible', timeout: 60000 });
    assert.equal(await summaryValue(page, 'speed'), speed);
  }
  assert.deepEqual(errors, []);
  await context.close();
});

/** Presses Tab until the element with `id` has focus (at most 80 presses). */
async function tabTo(page, selector) {
  for (let k = 0; k < 80; k += 1) {
    if (await page.evaluate((s) => document.activeElement?.matches(s), selector)) return;
    await page.keyboard.press('Tab');
  }
  throw new Error(`Tab never reached ${selector}`);
}

/** axe-core's audit of the page as it is; returns the serious and critical violations. */
async function auditViolations(page) {
  await page.addScriptTag({ path: join(import.meta.dirname, 'node_modules/axe-core/axe.min.js') });
  const result = await page.evaluate(() => window.axe.run(document, { resultTypes: ['violations'] }));
  return result.violations
    .filter((v) => v.impact === 'serious' || v.impact === 'critical')
    .map((v) => `${v.id} (${v.impact}): ${v.nodes.map((n) => n.target.join(' ')).join(', ')}`);
}

test('the keyboard alone takes a user from the file chooser to the analysis, a read-out and an export; axe finds no serious violation', async () => {
  // The audit script is injected, which the page's CSP would refuse: this context bypasses it.
  const { page, context, errors } = await openPage(base, { bypassCSP: true });
  // Listen for the chooser before anything else: Playwright turns on Chromium's interception
  // of file choosers when the first listener is added, by an asynchronous call. Listening only
  // as Enter is pressed races that call, and a chooser that opens first is a native one the
  // test never sees (and which blocks the next). See microsoft/playwright#28023 and
  // puppeteer/puppeteer#6040 for the race.
  const chooserOpened = new Promise((resolve) => page.once('filechooser', resolve));
  assert.deepEqual(await auditViolations(page), [], 'on the empty page');
  await tabTo(page, '#drop-zone');
  // Enter on the drop zone opens the chooser.
  await page.keyboard.press('Enter');
  let timer;
  const chooser = await Promise.race([
    chooserOpened,
    new Promise((_, reject) => {
      timer = setTimeout(() => reject(new Error('Enter on the drop zone opened no file chooser in 20 s')), 20000);
    }),
  ]).finally(() => clearTimeout(timer));
  await chooser.setFiles([demo.spikes, demo.layout]);
  await page.locator('#fig-site_map').waitFor({ state: 'visible' });
  await page.waitForFunction(() => document.activeElement?.id === 'track-text');
  await tabTo(page, '#analyze-button');
  await page.keyboard.press('Enter');
  await page.locator('#step-summary').waitFor({ state: 'visible', timeout: 60000 });
  await page.waitForFunction(() => document.activeElement?.id === 'burst-text');
  // The activation figure's sites, one by one, announced in the live read-out.
  await tabTo(page, '#fig-activation');
  await page.keyboard.press('ArrowDown');
  await page.waitForFunction(() => /^1 of \d+: /.test(document.getElementById('readout').textContent));
  const first = await page.textContent('#readout');
  await page.keyboard.press('ArrowDown');
  await page.waitForFunction(() => /^2 of \d+: /.test(document.getElementById('readout').textContent));
  assert.notEqual(await page.textContent('#readout'), first);
  assert.match(first, /site /);
  // Every Save SVG button has its own accessible name.
  const names = await page.$$eval('.svg-save', (bs) => bs.map((b) => b.getAttribute('aria-label')));
  assert.equal(new Set(names).size, names.length);
  assert.ok(names.every((n) => n && n.includes('SVG')), names.join(' | '));
  // An export with Enter.
  await tabTo(page, '[data-export="fronts_csv"]');
  const [download] = await Promise.all([page.waitForEvent('download'), page.keyboard.press('Enter')]);
  assert.equal(download.suggestedFilename(), 'fronts.csv');
  assert.deepEqual(await auditViolations(page), [], 'after the analysis');
  await shoot(page, 'keyboard-only');
  assert.deepEqual(errors, []);
  await context.close();
});

test('dragging across the raster zooms the raster and the rate to that span, double-click goes back', async () => {
  const { page, context, errors } = await openPage(base);
  await page.click('#demo-button');
  await analyse(page);
  const img = page.locator('#fig-raster');
  await img.scrollIntoViewIfNeeded();
  const box = await img.boundingBox();
  const before = await page.evaluate(() => window.ringline.state.settings.view.window_s);
  assert.equal(before, null);
  await page.mouse.move(box.x + 0.4 * box.width, box.y + box.height / 2);
  await page.mouse.down();
  await page.mouse.move(box.x + 0.6 * box.width, box.y + box.height / 2, { steps: 5 });
  await page.mouse.up();
  await page.waitForFunction(() => window.ringline.state.settings.view.window_s !== null);
  const [from, to] = await page.evaluate(() => window.ringline.state.settings.view.window_s);
  assert.ok(to > from && to - from < 15, `${from}..${to}`);
  assert.equal(Number(await page.inputValue('#window-form [name=from]')), from);
  // Both figures redrawn for the window: the raster's title names it.
  await page.waitForFunction((w) => JSON.parse(document.getElementById('fig-population_rate').dataset.view ?? '{}').window_s?.[0] === w, from);
  const svg = await page.evaluate(() => window.ringline.state.svgs.raster);
  assert.ok(svg.includes(`${from.toFixed(1)}-${to.toFixed(1)} s`));
  await img.dblclick();
  await page.waitForFunction(() => window.ringline.state.settings.view.window_s === null);
  assert.deepEqual(errors, []);
  await context.close();
});

test('imaging: the evidence view shows a ROI\'s dF/F with the onsets of the selected burst', async () => {
  const root = join(repo, 'demo-data/network-strip-16');
  const { page, context, errors } = await openPage(base);
  await dropFiles(page, [
    { name: 'traces.csv', path: join(root, 'traces.csv') },
    { name: 'roi_layout.csv', path: join(root, 'roi_layout.csv') },
  ]);
  await analyse(page);
  await page.locator('#fig-evidence').waitFor({ state: 'visible' });
  const svg = await page.evaluate(() => window.ringline.state.svgs.evidence);
  assert.match(svg, /dF\/F of ROI/);
  assert.match(svg, /event must reach/);
  await shoot(page, '11-evidence-imaging');
  assert.deepEqual(errors, []);
  await context.close();
});

/** Peak resident memory (VmHWM, bytes) of Chromium's renderer processes, from /proc. */
async function rendererPeaks() {
  const session = await browser.newBrowserCDPSession();
  const { processInfo } = await session.send('SystemInfo.getProcessInfo');
  await session.detach();
  const peaks = {};
  for (const p of processInfo.filter((q) => q.type === 'renderer')) {
    try {
      const status = readFileSync(`/proc/${p.id}/status`, 'utf8');
      peaks[p.id] = 1024 * Number(/VmHWM:\s+(\d+) kB/.exec(status)[1]);
    } catch { /* the process ended */ }
  }
  return peaks;
}

test('a 150 MB spike list is read in the worker with progress, and the tab stays within 3x the file', async () => {
  const dir = mkdtempSync(join(tmpdir(), 'ringline-large-'));
  const sites = 16;
  const lines = ['site,time_ms\n'];
  let size = lines[0].length;
  // About 9.4 million spikes: each site fires every ~1.6 ms of a 15,000 s recording.
  const chunks = [];
  for (let k = 0; size < 150e6; k += 1) {
    const row = `e${String(1 + (k % sites)).padStart(2, '0')},${(k * 0.1 + (k % 7) * 0.01).toFixed(2)}\n`;
    lines.push(row);
    size += row.length;
    if (lines.length >= 100000) { chunks.push(lines.join('')); lines.length = 0; }
  }
  chunks.push(lines.join(''));
  writeFileSync(join(dir, 'large.csv'), chunks.join(''));
  writeFileSync(join(dir, 'layout.csv'), `site,x_um,y_um\n${Array.from({ length: sites }, (_, c) => `e${String(c + 1).padStart(2, '0')},${c * 200},0`).join('\n')}\n`);
  const fileBytes = size;
  const { page, context, errors } = await openPage(base);
  const before = await rendererPeaks();
  const seen = [];
  await page.exposeFunction('noteProgress', (text) => seen.push(text));
  await page.evaluate(() => {
    new MutationObserver(() => window.noteProgress(document.getElementById('progress-text').textContent))
      .observe(document.getElementById('progress-text'), { childList: true, characterData: true, subtree: true });
  });
  await page.setInputFiles('#file-input', [join(dir, 'large.csv'), join(dir, 'layout.csv')]);
  await page.locator('#fig-site_map').waitFor({ state: 'visible', timeout: 120000 });
  await sessionKept(page); // the autosave (a digest of the file, the File kept as a Blob) is done too
  const after = await rendererPeaks();
  const grown = Math.max(...Object.entries(after).map(([pid, peak]) => peak - (before[pid] ?? 0)));
  const peak = Math.max(...Object.values(after));
  console.log(`large spike list: ${(fileBytes / 1e6).toFixed(0)} MB; renderer peak ${(peak / 1e6).toFixed(0)} MB `
    + `(${(peak / fileBytes).toFixed(2)}x the file), grown ${(grown / 1e6).toFixed(0)} MB during the import`);
  assert.ok(peak <= 3 * fileBytes, `renderer peak ${peak} bytes for a ${fileBytes}-byte file`);
  const percents = seen.map((t) => /reading the file: (\d+)% of the file/.exec(t)?.[1]).filter(Boolean).map(Number);
  assert.ok(percents.length >= 5 && percents.includes(100), `progress seen: ${seen.slice(0, 8)}`);
  // Never held whole: a notebook names it by its digest (and says so when saved).
  assert.equal(await page.evaluate(() => window.ringline.call('notebookNote')),
    `The notebook names large.csv (${(fileBytes / 1048576).toFixed(1)} MiB) by its SHA-256 without holding it (too large, or not text). `
    + 'Keep that file with the notebook, and drop both together to re-open it.');
  const kept = await page.evaluate(() => window.ringline.call('inputFiles'));
  assert.equal(kept[0].sha256, createHash('sha256').update(readFileSync(join(dir, 'large.csv'))).digest('hex'));
  assert.match(await page.textContent('#track-text'), /16 sites/);
  assert.deepEqual(errors, []);
  await context.close();
});

test('Cancel while a large file is read stops it and leaves the page usable', async () => {
  const dir = mkdtempSync(join(tmpdir(), 'ringline-cancel-'));
  const rows = Array.from({ length: 3_000_000 }, (_, k) => `e${String(1 + (k % 4)).padStart(2, '0')},${(k * 0.5).toFixed(1)}\n`);
  writeFileSync(join(dir, 'big.csv'), `site,time_ms\n${rows.join('')}`);
  writeFileSync(join(dir, 'layout.csv'), 'site,x_um,y_um\ne01,0,0\ne02,200,0\ne03,400,0\ne04,600,0\n');
  const { page, context, errors } = await openPage(base);
  await page.setInputFiles('#file-input', [join(dir, 'big.csv'), join(dir, 'layout.csv')]);
  await page.locator('#cancel-button').waitFor({ state: 'visible' });
  // The progress sits beside the running step, inside step 1.
  assert.equal(await page.evaluate(() => document.getElementById('progress').closest('section')?.id), 'step-inputs');
  await page.click('#cancel-button');
  await page.waitForFunction(() => /Reading cancelled/.test(document.getElementById('core-status').textContent));
  await page.waitForFunction(() => window.ringlineCoreReadyAt !== undefined);
  await page.click('#demo-button');
  await analyse(page);
  assert.ok((await summaryValue(page, 'bursts')) > 0);
  assert.deepEqual(errors, []);
  await context.close();
});
