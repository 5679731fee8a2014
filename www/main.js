// The page: moves files and settings to the worker that holds ringline's wasm core, and puts
// what comes back into the DOM. No analysis happens here; text from files only ever goes into
// the page through textContent, and figures are SVG shown as images.

const $ = (id) => document.getElementById(id);

// ---------------------------------------------------------------- worker bridge

let worker = null;
let ready = null;
let nextId = 1;
const pending = new Map();

function makeWorker() {
  // The single-file build carries the worker's source (a classic script) in a non-executed
  // script element.
  const inline = document.getElementById('ringline-worker-source');
  if (inline) {
    const url = URL.createObjectURL(new Blob([inline.textContent], { type: 'text/javascript' }));
    return new Worker(url);
  }
  return new Worker(new URL('./worker.js', import.meta.url), { type: 'module' });
}

function startWorker() {
  const started = performance.now();
  worker = makeWorker();
  ready = new Promise((resolve, reject) => {
    worker.onmessage = (event) => {
      const m = event.data;
      if ('ready' in m) {
        if (m.ready) {
          window.ringlineCoreReadyMs = performance.now() - started;
          window.ringlineCoreReadyAt = performance.now(); // ms since navigation
          resolve();
        } else {
          reject(m.error);
        }
        return;
      }
      const p = pending.get(m.id);
      if (!p) return;
      if (m.progress) {
        p.onProgress?.(m.progress[0], m.progress[1], m.stage);
        return;
      }
      pending.delete(m.id);
      if (m.ok) {
        p.resolve(m.value);
      } else {
        p.reject(m.error);
        if (m.crashed) restartWorker('The analysis core crashed and was restarted.');
      }
    };
    worker.onerror = (event) => {
      event.preventDefault();
      reject({ message: `The analysis core failed: ${event.message}` });
      restartWorker(`The analysis core failed (${event.message}) and was restarted.`);
    };
  });
  ready.then(
    () => setStatus(`Analysis core ready (${Math.round(window.ringlineCoreReadyMs)} ms).`),
    (e) => setStatus(e.message, true),
  );
}

function call(op, args = {}, onProgress = null) {
  return ready.then(() => new Promise((resolve, reject) => {
    const id = nextId++;
    pending.set(id, { resolve, reject, onProgress });
    worker.postMessage({ id, op, args });
  }));
}

/** Ends the worker (and whatever it was computing) and starts a fresh one with the same files. */
async function restartWorker(why) {
  worker?.terminate();
  for (const p of pending.values()) p.reject({ message: why });
  pending.clear();
  startWorker();
  setStatus(why, true);
  state.report = null;
  if (state.voltage && state.layout) {
    setStatus(`${why} To detect its spikes, drop or choose the voltage file again.`, true);
  } else if (state.activity && state.layout) {
    try {
      await openWorkbook({ keepSettings: true });
    } catch (e) {
      showError('input-error', e);
    }
  }
}

// ---------------------------------------------------------------- state

const state = {
  files: [],          // { name, size, bytes, kind, status } (voltage files keep `file`, not bytes)
  activity: null,
  layout: null,
  voltage: null,      // a raw voltage file (WAV, or samples with a sidecar)
  sidecar: null,
  stimuli: null,      // a dropped stimulus protocol, attached to the recording when it opens
  electrodes: null,
  settings: null,     // every step's settings, as the core reports them
  inspection: null,
  report: null,
  svgs: {},           // figure name -> SVG text, for export
  fileStem: 'ringline',
  simulated: null,    // file name -> text of the last simulated culture
  truthText: null,    // its truth.json while its recording is the one open
  study: null,        // { manifest, files, names, matches, entries, open } when several recordings were dropped
};

function setStatus(text, isProblem = false) {
  const el = $('core-status');
  el.textContent = text;
  el.classList.toggle('problem', isProblem);
}

function errorText(e) {
  if (e && typeof e === 'object') return e.text ?? e.message ?? JSON.stringify(e);
  return String(e);
}

function showError(id, e) {
  const el = $(id);
  el.textContent = errorText(e);
  el.hidden = false;
}

function clearError(id) {
  $(id).hidden = true;
  $(id).textContent = '';
}

const KIND_NAMES = {
  spike_list: 'spike list', layout: 'layout', roi_traces: 'ROI traces', notebook: 'ringline notebook',
  voltage: 'raw voltage', sidecar: 'voltage sidecar', manifest: 'study manifest', stimuli: 'stimulus protocol',
};

function formatBytes(n) {
  if (n < 1024) return `${n} B`;
  if (n < 1024 * 1024) return `${(n / 1024).toFixed(1)} KiB`;
  return `${(n / 1024 / 1024).toFixed(1)} MiB`;
}

function renderFiles() {
  const body = $('file-table').tBodies[0];
  body.replaceChildren();
  for (const f of state.files) {
    const row = body.insertRow();
    for (const text of [f.name, formatBytes(f.size), KIND_NAMES[f.kind] ?? 'not recognised', f.status]) {
      row.insertCell().textContent = text;
    }
    if (f.problem) row.classList.add('problem');
  }
  $('file-table').hidden = state.files.length === 0;
}

// ---------------------------------------------------------------- step 1: inputs

/** The page's kinds, from the core's one rule for telling input files apart. */
const KIND_OF_WORD = {
  spike_list: 'spike_list', roi_traces: 'roi_traces', layout: 'layout', wav: 'voltage',
  voltage_samples: 'voltage', sidecar: 'sidecar', json: 'notebook', manifest: 'manifest', stimuli: 'stimuli',
};
const ACTIVITY_KINDS = ['spike_list', 'roi_traces', 'voltage'];

/** What a dropped file holds, judged by the core from its name and first 64 KiB. Recordings
 * stay `File`s (read when opened, so a study never holds every recording at once); small
 * companions (layouts, sidecars, manifests, notebooks) are read whole. */
async function classify(file) {
  const head = await file.slice(0, 65536).arrayBuffer();
  const word = await call('classify', { name: file.name, head });
  const kind = KIND_OF_WORD[word] ?? null;
  const bytes = kind && !ACTIVITY_KINDS.includes(kind) ? await file.arrayBuffer() : null;
  // A file of no known kind: the core says why, at its line, as the command line would.
  const why = kind ? null : await call('whyUnrecognised', { name: file.name, head });
  return { kind, word, bytes, why };
}

/** The bytes of a file entry (read from its `File` when not kept). */
async function bytesOf(entry) {
  return entry.bytes ? entry.bytes.slice(0) : await entry.file.arrayBuffer();
}

/** Adds files. With `asStudy`, one drop holding a study manifest or several recordings opens
 * the study table instead of a single recording. */
async function addFiles(list, { asStudy = false } = {}) {
  clearError('input-error');
  const added = [];
  for (const file of list) {
    const { kind, word, bytes, why } = await classify(file);
    const entry = { name: file.name, size: file.size, bytes, file, kind, word, status: '' };
    entry.status = entry.kind ? 'read' : 'not read (see the message above)';
    entry.problem = !entry.kind;
    if (why) showError('input-error', why);
    state.files = state.files.filter((f) => f.name !== entry.name);
    state.files.push(entry);
    added.push(entry);
  }
  const recordings = added.filter((f) => ACTIVITY_KINDS.includes(f.kind));
  // A new recording (or notebook) replaces the last one in the file table; the companions
  // still in use (layout, sidecar, protocol) stay until they are replaced too.
  if (recordings.length || added.some((f) => f.kind === 'notebook')) {
    const replaced = (kind) => added.some((f) => f.kind === kind);
    const inUse = [
      !replaced('layout') && state.layout, !replaced('sidecar') && state.sidecar, !replaced('stimuli') && state.stimuli,
    ];
    state.files = state.files.filter((f) => added.includes(f) || inUse.includes(f));
  }
  if (asStudy && (added.some((f) => f.kind === 'manifest') || recordings.length > 1)) {
    renderFiles();
    await openStudy(added);
    return;
  }
  // A new recording dropped without a protocol does not inherit the last one's.
  if (recordings.length && !added.some((f) => f.kind === 'stimuli')) state.stimuli = null;
  const notebook = added.find((f) => f.kind === 'notebook');
  if (notebook) {
    // Files dropped with a notebook supply the ones it names without holding (by SHA-256).
    const others = [];
    for (const f of added) if (f !== notebook) others.push([f.file?.webkitRelativePath || f.name, await bytesOf(f)]);
    renderFiles();
    await openNotebook(notebook, others);
    return;
  }
  for (const entry of added) {
    if (entry.kind === 'spike_list' || entry.kind === 'roi_traces') { state.activity = entry; state.voltage = null; }
    if (entry.kind === 'voltage') { state.voltage = entry; state.activity = null; }
    if (entry.kind === 'sidecar') state.sidecar = entry;
    if (entry.kind === 'layout') state.layout = entry;
    if (entry.kind === 'stimuli') state.stimuli = entry;
  }
  renderFiles();
  await openChosen();
}

/** Opens the recording the chosen files make, or says what is still missing. */
async function openChosen() {
  const wav = state.voltage && state.voltage.word === 'wav';
  if (state.voltage && state.layout && (wav || state.sidecar)) {
    await openVoltage({ keepSettings: state.settings !== null });
  } else if (state.voltage) {
    state.voltage.status = state.layout ? 'read; now add its sidecar (JSON)' : 'read; now add its layout';
    renderFiles();
  } else if (state.activity && state.layout) {
    await openWorkbook({ keepSettings: state.settings !== null });
  } else if (state.activity) {
    state.activity.status = 'read; now add its layout';
    renderFiles();
  } else if (state.layout) {
    state.layout.status = 'read; now add a recording';
    renderFiles();
  }
}

async function openVoltage({ keepSettings }) {
  clearError('input-error');
  state.report = null;
  state.inspection = null;
  hideFrom('step-track');
  setBusy(true, 'Detecting spikes…', $('file-table'));
  try {
    const result = await call('openVoltage', {
      file: state.voltage.file,
      sidecar: state.sidecar && { name: state.sidecar.name, bytes: state.sidecar.bytes.slice(0) },
      layout: { name: state.layout.name, bytes: await bytesOf(state.layout) },
      settings: keepSettings ? state.settings : null,
    }, showProgress);
    state.settings = result.settings;
    state.inspection = result.inspection;
    state.electrodes = result.electrodes;
    state.voltage.status = 'spikes detected';
    state.voltage.problem = false;
    state.layout.status = 'imported';
    await attachStimuli();
    if (state.sidecar) state.sidecar.status = 'used';
    state.fileStem = state.voltage.name.replace(/\.[^.]*$/, '').replace(/[^A-Za-z0-9_-]+/g, '_') || 'ringline';
    renderFiles();
    renderElectrodes();
    fillForms();
    await renderTrack();
    $('step-bursts').hidden = false;
    $('track-text').focus();
    scheduleAutosave();
  } catch (e) {
    state.voltage.status = errorText(e);
    state.voltage.problem = true;
    renderFiles();
    showError('input-error', e);
  } finally {
    setBusy(false);
  }
}

function renderElectrodes() {
  const table = $('electrode-table');
  const body = table.tBodies[0];
  body.replaceChildren();
  for (const e of state.electrodes ?? []) {
    const row = body.insertRow();
    for (const text of [e.channel, e.site, e.noise_uv.toFixed(2), e.spike_count, e.rate_hz.toFixed(3), e.status.replaceAll('_', ' ')]) {
      row.insertCell().textContent = String(text);
    }
    if (e.status !== 'ok') row.classList.add('problem');
  }
  table.hidden = !state.electrodes;
}

async function openWorkbook({ keepSettings }) {
  clearError('input-error');
  const payload = async (f) => ({ name: f.name, bytes: await bytesOf(f) });
  state.report = null;
  hideFrom('step-bursts');
  try {
    setBusy(true, 'Reading the recording…', $('file-table'));
    state.importing = Boolean(state.activity.file);
    const result = await call('open', {
      // A recording goes to the worker as its File (read there in pieces, with progress).
      activity: state.activity.file ? { name: state.activity.name, file: state.activity.file } : await payload(state.activity),
      layout: await payload(state.layout),
      settings: keepSettings ? state.settings : null,
    }, showProgress).finally(() => { setBusy(false); state.importing = false; });
    state.settings = result.settings;
    state.inspection = result.inspection;
    state.electrodes = null;
    renderElectrodes();
    state.activity.status = 'imported';
    state.activity.problem = false;
    state.layout.status = 'imported';
    state.layout.problem = false;
    await attachStimuli();
    state.fileStem = state.activity.name.replace(/\.[^.]*$/, '').replace(/[^A-Za-z0-9_-]+/g, '_') || 'ringline';
    renderFiles();
    fillForms();
    await renderTrack();
    $('step-bursts').hidden = false;
    $('track-text').focus();
    scheduleAutosave();
  } catch (e) {
    for (const f of [state.activity, state.layout].filter(Boolean)) {
      f.status = 'not imported';
    }
    const culprit = e?.detail?.detail?.place?.file;
    for (const f of [state.activity, state.layout].filter(Boolean)) {
      if (!culprit || f.name === culprit) {
        f.status = errorText(e);
        f.problem = true;
      }
    }
    renderFiles();
    showError('input-error', e);
    hideFrom('step-track');
  }
}

/** Gives the open recording the dropped stimulus protocol, if any (the core reads it with
 * the importers' located errors). */
async function attachStimuli() {
  const f = state.stimuli;
  if (!f) return;
  try {
    await call('attachStimuli', { name: f.name, bytes: await bytesOf(f) });
    f.status = 'imported';
    f.problem = false;
  } catch (e) {
    f.status = errorText(e);
    f.problem = true;
    showError('input-error', e);
  }
}

async function openNotebook(entry, files = null) {
  setBusy(true, 'Re-opening the notebook…', $('file-table'));
  try {
    const result = await call('openNotebook', { name: entry.name, bytes: entry.bytes.slice(0), files }, showProgress);
    const study = await call('notebookStudy', { name: entry.name, bytes: entry.bytes.slice(0) });
    state.study = study && {
      manifest: study.manifest,
      files: [],
      names: [],
      matches: study.manifest.rows.map(() => ({ problem: 'its files are not open: drop the study\'s files again to analyse or open it' })),
      entries: study.recordings.map((e) => e && { status_json: e.status_json, files: e.files }),
      open: null,
    };
    await renderStudy();
    state.settings = result.settings;
    state.inspection = result.inspection;
    state.report = result.report;
    entry.status = 'opened: files and settings restored, analysis re-run';
    for (const f of state.files) if (f !== entry && !f.problem) f.status = 'used by the notebook';
    renderFiles();
    fillForms();
    await renderTrack();
    $('step-bursts').hidden = false;
    await renderResults();
    scheduleAutosave();
  } catch (e) {
    entry.status = errorText(e);
    entry.problem = true;
    renderFiles();
    showError('input-error', e);
  } finally {
    setBusy(false);
  }
}

async function useDemo() {
  const demo = await call('demo');
  const make = (name, text) => new File([text], name.split('/').pop(), { type: 'text/csv' });
  await addFiles([make(demo.activity_name, demo.activity), make(demo.layout_name, demo.layout)]);
}

/** Runs the culture the simulator form describes in the worker and opens its recording. */
async function simulateCulture(event) {
  event.preventDefault();
  clearError('input-error');
  const form = $('sim-form');
  const options = { shape: form.shape.value };
  for (const name of ['length_um', 'width_um', 'radius_um', 'density_per_mm2', 'mean_in_degree', 'sigma_um', 'electrodes', 'duration_s', 'seed']) {
    if (form[name].value !== '') options[name] = Number(form[name].value);
  }
  $('sim-progress-row').hidden = false;
  $('sim-result').hidden = true;
  $('sim-button').disabled = true;
  $('sim-progress').value = 0;
  $('sim-progress-text').textContent = 'growing and wiring the culture…';
  try {
    const files = await call('simulateCulture', { options }, (done, total, stage) => {
      if (stage !== 'integrating') return;
      $('sim-progress').max = Math.max(1, total);
      $('sim-progress').value = done;
      $('sim-progress-text').textContent = `simulating: ${Math.round(done)} of ${Math.round(total)} s of culture time`;
    });
    state.simulated = Object.fromEntries(files);
    const truth = JSON.parse(state.simulated['truth.json']);
    $('sim-result-text').textContent = [`Simulated ${truth.neurons} neurons for ${truth.scenario.duration_s} s: ${truth.spikes} spikes, ${truth.bursts.length} bursts.`,
      ...(truth.notices ?? []).map((n) => `Notice: ${n}.`)].join(' ');
    $('sim-result').hidden = false;
    const make = (name) => new File([state.simulated[name]], name, { type: 'text/csv' });
    await addFiles([make('spikes.csv'), make('layout.csv')]);
    state.truthText = state.simulated['truth.json'];
  } catch (e) {
    showError('input-error', e);
  } finally {
    $('sim-progress-row').hidden = true;
    $('sim-button').disabled = false;
  }
}

function hideFrom(stepId) {
  const order = ['step-track', 'step-bursts', 'step-fronts', 'step-rhythm', 'step-response', 'step-summary'];
  for (const id of order.slice(order.indexOf(stepId))) $(id).hidden = true;
  if (order.indexOf(stepId) <= 1) $('burst-results').hidden = true;
}

// ---------------------------------------------------------------- settings forms

function fillForms() {
  const s = state.settings;
  const track = $('track-form').elements;
  track.kind.value = s.track.kind;
  track.waypoints.value = (s.track.waypoints_um ?? []).map(([x, y]) => `${x},${y}`).join('; ');
  $('waypoints-field').hidden = s.track.kind !== 'polyline';
  const select = track.start_site;
  select.replaceChildren(new Option('(default end)', ''));
  for (const site of state.inspection?.sites ?? []) select.add(new Option(site.site, site.site));
  select.value = s.track.start_site ?? '';
  track.reverse.checked = s.track.reverse;
  const a = s.analysis;
  const bursts = $('burst-form').elements;
  bursts.detector.value = a.bursts.detector;
  bursts.threshold_sd.value = a.bursts.population_rate.threshold_sd;
  bursts.min_site_fraction.value = a.bursts.min_site_fraction;
  bursts.estimator.value = a.fronts.estimator;
  bursts.resamples.value = a.fronts.resamples;
  bursts.seed.value = a.fronts.seed;
}

function readTrackForm() {
  const f = $('track-form').elements;
  const waypoints = f.kind.value === 'polyline'
    ? f.waypoints.value.split(';').filter((p) => p.trim() !== '').map((p) => p.split(',').map((v) => Number(v.trim())))
    : [];
  if (waypoints.some((p) => p.length !== 2 || p.some((v) => !Number.isFinite(v)))) {
    throw { message: 'Waypoints: expected X,Y pairs in micrometres separated by semicolons, for example 0,0; 2000,0; 2000,1500.' };
  }
  return {
    ...state.settings.track,
    kind: f.kind.value,
    waypoints_um: waypoints,
    start_site: f.start_site.value || null,
    reverse: f.reverse.checked,
  };
}

function readAnalysisForm() {
  const f = $('burst-form').elements;
  const a = structuredClone(state.settings.analysis);
  a.bursts.detector = f.detector.value;
  a.bursts.population_rate.threshold_sd = Number(f.threshold_sd.value);
  a.bursts.min_site_fraction = Number(f.min_site_fraction.value);
  a.fronts.estimator = f.estimator.value;
  a.fronts.resamples = Math.round(Number(f.resamples.value));
  a.fronts.seed = Math.round(Number(f.seed.value));
  return a;
}

// ---------------------------------------------------------------- figures

async function drawFigure(name, extra = {}) {
  const img = $(`fig-${name}`);
  const width = Math.max(360, Math.min(900, Math.round(img.parentElement.clientWidth || 760)));
  const height = name === 'raster' ? Math.max(300, Math.min(700, 80 + 14 * (state.inspection?.site_count ?? 16))) : 340;
  try {
    const fig = name === 'evidence'
      ? await call('evidence', { site: extra.site, width, height })
      : await call('figure', { figure: name, width, height, extra });
    state.svgs[name] = fig.svg;
    const old = img.src;
    img.src = URL.createObjectURL(new Blob([fig.svg], { type: 'image/svg+xml' }));
    img.width = fig.width_px;
    img.height = fig.height_px;
    // Figure pixels, for pointer read-outs: naturalWidth is 0 while a new picture loads.
    img.dataset.widthPx = String(fig.width_px);
    img.dataset.heightPx = String(fig.height_px);
    img.hidden = false;
    img.parentElement.classList.remove('empty');
    img.parentElement.dataset.note = '';
    if (old.startsWith('blob:')) URL.revokeObjectURL(old);
    await img.decode().catch(() => {});
    // Which view this picture shows (burst, time window), for anyone waiting on it.
    img.dataset.view = JSON.stringify(state.settings?.view ?? {});
  } catch (e) {
    delete state.svgs[name];
    img.hidden = true;
    img.parentElement.classList.add('empty');
    img.parentElement.dataset.note = errorText(e);
  }
}

// ---------------------------------------------------------------- step 2: track

/** Fills a table's body with the rows of a core table (`{ header, rows }`), as text. */
function fillTable(table, { rows }) {
  const body = table.tBodies[0];
  body.replaceChildren();
  for (const cells of rows) {
    const row = body.insertRow();
    for (const text of cells) row.insertCell().textContent = text;
  }
}

function fillNotices(listId, notices) {
  const list = $(listId);
  list.replaceChildren();
  for (const n of notices ?? []) {
    const item = document.createElement('li');
    const where = [n.place?.file, n.place?.line && `line ${n.place.line}`, n.place?.site && `site ${n.place.site}`]
      .filter(Boolean).join(', ');
    item.textContent = where ? `${where}: ${n.message}` : n.message;
    list.append(item);
  }
}

async function renderTrack() {
  const i = state.inspection;
  $('track-text').textContent = (await call('words', {})).track;
  fillNotices('track-notices', i.notices);
  $('step-track').hidden = false;
  await drawFigure('site_map');
}

async function refitTrack(event) {
  event.preventDefault();
  try {
    state.inspection = await call('setTrack', { track: readTrackForm() });
    state.settings = await call('settings');
    state.report = null;
    scheduleAutosave();
    hideFrom('step-fronts');
    $('burst-results').hidden = true;
    await renderTrack();
  } catch (e) {
    showError('input-error', e);
  }
}

// ---------------------------------------------------------------- step 3 to 5: analysis

/** Shows the progress bar and Cancel inside the step that is working (`place`: the element
 * they follow), kept in view while it runs (sticky at the bottom of the window). */
function setBusy(busy, text = '', place = null) {
  const bar = $('progress');
  if (busy && place && bar.previousElementSibling !== place) place.after(bar);
  bar.hidden = !busy;
  if (busy) bar.scrollIntoView({ block: 'nearest' });
  $('analyze-button').disabled = busy;
  $('progress-text').textContent = text;
  if (busy) $('progress-bar').value = 0;
}

function showProgress(done, total, stage = 'analysing bursts') {
  $('progress-bar').max = Math.max(1, total);
  $('progress-bar').value = done;
  const percent = Math.round((100 * done) / Math.max(1, total));
  $('progress-text').textContent = stage === 'analysing bursts'
    ? `burst ${done} of ${total}`
    : `${stage}: ${percent}% of the file`;
}

async function runAnalysis(event) {
  event?.preventDefault();
  clearError('analysis-error');
  setBusy(true, 'Finding bursts…', $('burst-form'));
  try {
    state.report = await call('analyze', { analysis: readAnalysisForm() }, showProgress);
    state.settings = await call('settings');
    await renderResults();
    $('burst-text').focus();
    await updateOpenStudyRecording();
    scheduleAutosave();
  } catch (e) {
    showError('analysis-error', e);
  } finally {
    setBusy(false);
  }
}

async function renderResults() {
  const r = state.report;
  if (!r) return;
  const s = r.summary;
  document.querySelector('[data-name="electrodes.csv"]').hidden = !r.electrodes;
  $('burst-results').hidden = false;
  $('burst-text').textContent = (await call('words', {})).steps.bursts;
  const [from, to] = state.settings.view.window_s ?? [null, null];
  const w = $('window-form').elements;
  if (from !== null) { w.from.value = from; w.to.value = to; }
  for (const name of ['raster', 'population_rate']) await drawFigure(name);
  await drawHistogram('interval_histogram', 'interval-bins');
  $('step-fronts').hidden = false;
  $('burst-count').textContent = `of ${r.bursts.length}`;
  await selectBurst(state.settings.view.burst);
  await drawHistogram('speed_histogram', 'speed-bins');
  for (const name of ['speed_over_time', 'initiation_sites', 'reliability', 'leaders', 'recruitment']) await drawFigure(name);
  await renderRhythm();
  await renderResponse();
  await renderSummary();
  await renderTruth();
}

/** For a culture simulated in this tab: the analysis beside the simulation's truth (the core
 * matches the fronts and computes every number; this only fills the table). */
async function renderTruth() {
  $('truth-block').hidden = true;
  if (!state.truthText) return;
  const c = await call('compareTruth', { truth: state.truthText });
  $('truth-text').textContent = c.sentence;
  fillTable($('truth-table'), c.table);
  $('truth-block').hidden = false;
}

async function setWindow(event) {
  event.preventDefault();
  const w = $('window-form').elements;
  const from = Number(w.from.value);
  const to = Number(w.to.value);
  const view = { ...state.settings.view, window_s: (w.from.value !== '' && w.to.value !== '') ? [from, to] : null };
  await call('setView', { view });
  state.settings.view = view;
  scheduleAutosave();
  for (const name of ['raster', 'population_rate']) await drawFigure(name);
}

async function selectBurst(number) {
  const bursts = state.report?.bursts ?? [];
  if (bursts.length === 0) {
    $('front-text').textContent = 'No bursts were found.';
    await drawFigure('activation');
    return;
  }
  const n = Math.min(Math.max(1, Math.round(number) || 1), bursts.length);
  const view = { ...state.settings.view, burst: n };
  await call('setView', { view });
  state.settings.view = view;
  scheduleAutosave();
  $('burst-number').value = n;
  $('front-text').textContent = (await call('words', { burst: n })).burst;
  $('readout').textContent = READOUT_HINT;
  readoutIndex = -1;
  await drawFigure('activation');
  await drawFigure('raster'); // its marks show the selected burst's activation times
  await renderEvidence();
}

/** The evidence view: voltage around a site's spikes, or a ROI's dF/F (not for spike lists). */
async function renderEvidence() {
  const r = state.report;
  const shown = Boolean(r && (state.electrodes || r.files.some((f) => f.kind === 'roi_traces')));
  $('evidence-block').hidden = !shown;
  if (!shown) return;
  const select = $('evidence-site');
  const names = state.inspection.sites.map((s) => s.site);
  if (select.dataset.sites !== names.join('\n')) {
    select.dataset.sites = names.join('\n');
    select.replaceChildren(...names.map((n) => new Option(n, n)));
    const origin = r.bursts[state.settings.view.burst - 1]?.front?.origin_site;
    if (origin) select.value = origin;
  }
  await drawFigure('evidence', { site: select.value });
}

/** A histogram with the bins the user asked for (Freedman-Diaconis when the field is empty). */
function drawHistogram(name, field) {
  const bins = Math.round(Number($(field).value));
  return drawFigure(name, $(field).value !== '' && bins >= 1 ? { bins: Math.min(bins, 200) } : {});
}

/** Step 5: the numbers come from the report; this only words them and asks for figures. */
async function renderRhythm() {
  const { steps } = await call('words', {});
  for (const [id, text] of [['rhythm-text', steps.rhythm], ['sites-text', steps.sites], ['synchrony-text', steps.synchrony], ['lags-text', steps.lags]]) {
    $(id).textContent = text;
  }
  $('step-rhythm').hidden = false;
  for (const name of ['rate_spectrum', 'site_frequencies', 'sttc_matrix', 'lags']) await drawFigure(name);
}

/** Step 6: the responses to the stimuli, when a protocol came with the recording. */
async function renderResponse() {
  const r = state.report?.response;
  $('step-response').hidden = !r;
  if (!r) return;
  const { response } = await call('words', {});
  $('response-text').textContent = response.sentence;
  fillTable($('response-table'), response.table);
  const select = $('response-site');
  const keep = select.value;
  select.replaceChildren(new Option('all sites', ''));
  for (const c of r.sites) select.append(new Option(`site ${c.name} (${c.fit.kind.replaceAll('_', ' ')})`, c.name));
  if ([...select.options].some((o) => o.value === keep)) select.value = keep;
  await drawResponseCurve();
}

function drawResponseCurve() {
  const site = $('response-site').value;
  return drawFigure('response_curve', site ? { site } : {});
}

/** The summary table: the core's facts (the lines of the text report), keyed for tests. */
async function renderSummary() {
  const body = $('summary-table').tBodies[0];
  body.replaceChildren();
  for (const fact of await call('summaryFacts')) {
    const row = body.insertRow();
    const th = document.createElement('th');
    th.scope = 'row';
    th.textContent = fact.label;
    row.append(th);
    const cell = row.insertCell();
    cell.textContent = fact.text;
    if (fact.value !== null) cell.dataset.value = String(fact.value);
    cell.dataset.key = fact.key;
  }
  fillNotices('analysis-notices', state.report.notices);
  $('step-summary').hidden = false;
}

async function saveReport() {
  setBusy(true, 'Writing the report…', $('save-report').parentElement);
  const html = await call('reportHtml', {}, showProgress).finally(() => setBusy(false));
  download(`${state.fileStem}-report.html`, html, 'text/html');
}

// ---------------------------------------------------------------- the study

/** Opens the study the dropped files make: their manifest, or one the core writes for
 * recordings dropped with a single layout. Nothing is analysed yet. */
async function openStudy(files) {
  clearError('input-error');
  try {
    const given = files.find((f) => f.kind === 'manifest');
    let manifest;
    if (given) {
      manifest = await call('readManifest', { name: given.name, bytes: given.bytes.slice(0) });
      given.status = `study of ${manifest.rows.length} recordings`;
    } else {
      const made = await call('manifestForFiles', { files: files.map((f) => [f.name, f.word]) });
      manifest = await call('readManifest', { name: made.name, bytes: new TextEncoder().encode(made.text).buffer });
    }
    const names = files.map((f) => f.file.webkitRelativePath || f.name);
    const matches = await call('matchStudy', { manifest, names });
    state.study = { manifest, files, names, matches, entries: manifest.rows.map(() => null), open: null };
    renderFiles();
    await renderStudy();
    $('study-run').focus();
  } catch (e) {
    state.study = null;
    await renderStudy();
    showError('input-error', e);
  }
}

/** The study step: the core words the sentence and the table; this places them and adds
 * each row's Open button. */
async function renderStudy() {
  const study = state.study;
  $('study').hidden = !study;
  if (!study) return;
  const { manifest } = study;
  const rows = manifest.rows.map((_, i) => {
    const e = study.entries[i];
    return {
      status_json: e?.status_json ?? null,
      summary_json: e?.files.find((f) => f[0] === 'summary.json')?.[1] ?? null,
      problem: study.matches[i].problem ?? null,
    };
  });
  const view = await call('studyView', { manifest, rows });
  $('study-text').textContent = view.sentence;
  const head = $('study-table').tHead;
  head.replaceChildren();
  const hr = head.insertRow();
  for (const h of [...view.table.header, '']) {
    const th = document.createElement('th');
    th.scope = 'col';
    th.textContent = h;
    hr.append(th);
  }
  fillTable($('study-table'), view.table);
  [...$('study-table').tBodies[0].rows].forEach((tr, i) => {
    const row = manifest.rows[i];
    if (view.problem[i]) tr.classList.add('problem');
    if (study.open === i) tr.classList.add('open');
    const cell = tr.insertCell();
    if (!study.matches[i].problem) {
      const b = document.createElement('button');
      b.type = 'button';
      b.textContent = study.open === i ? 'open below' : 'Open';
      b.setAttribute('aria-label', `Open recording ${row.recording} in the steps below`);
      b.addEventListener('click', () => openStudyRecording(i).catch((e) => showError('input-error', e)));
      cell.append(b);
    }
  });
  $('study-save').disabled = !view.complete;
  // Comparing conditions needs every recording analysed or tried, and a column to compare by.
  const form = $('compare-form');
  form.hidden = !view.complete || manifest.columns.length === 0;
  for (const [select, first] of [[form.elements.by, null], [form.elements.unit, 'each recording']]) {
    const keep = select.value;
    select.replaceChildren();
    if (first) select.append(new Option(first, ''));
    for (const c of manifest.columns) select.append(new Option(c, c));
    if ([...select.options].some((o) => o.value === keep)) select.value = keep;
  }
}

/** The files of manifest row `i`, as the worker needs them. */
async function studyFiles(i) {
  const { files, matches, manifest } = state.study;
  const m = matches[i];
  const row = manifest.rows[i];
  return {
    file: files[m.data].file,
    sidecar: m.sidecar == null ? null : { name: files[m.sidecar].name, bytes: await bytesOf(files[m.sidecar]) },
    layout: { name: row.layout, bytes: await bytesOf(files[m.layout]) },
    layer: m.settings == null ? null : { name: row.settings, text: new TextDecoder().decode(await bytesOf(files[m.settings])) },
    stimuli: m.stimuli == null ? null : { name: row.stimuli, bytes: await bytesOf(files[m.stimuli]) },
  };
}

/** What the study keeps of a recording's result: its status and the three files the study
 * tables are made from (the rest is written again when the recording is opened), so that a
 * large study holds little. */
const STUDY_FILES = ['summary.json', 'bursts.csv', 'fronts.csv'];
function studyEntry(entry) {
  return {
    status_json: entry.status_json,
    files: entry.files.filter((f) => STUDY_FILES.includes(f[0])),
  };
}

/** Analyses every recording of the study in turn, as `ringline batch` does; Cancel stops it. */
async function runStudy() {
  const study = state.study;
  if (!study) return;
  clearError('input-error');
  const n = study.manifest.rows.length;
  setBusy(true, 'Analysing the study…', $('study-table'));
  $('study-run').disabled = true;
  try {
    for (let i = 0; i < n; i += 1) {
      const row = study.manifest.rows[i];
      const m = study.matches[i];
      const label = `recording ${i + 1} of ${n} (${row.recording})`;
      $('progress-text').textContent = label;
      let entry;
      if (m.problem) {
        entry = await call('failedStudyEntry', { manifest: study.manifest, row: i, message: m.problem });
      } else {
        entry = await call('studyRecording', {
          manifest: study.manifest, row: i, name: row.data, settings: state.settings, ...(await studyFiles(i)),
        }, (done, total, stage) => {
          $('progress-bar').max = Math.max(1, total);
          $('progress-bar').value = done;
          $('progress-text').textContent = `${label}: ${stage === 'detecting spikes' ? 'detecting spikes' : `burst ${done} of ${total}`}`;
        });
      }
      study.entries[i] = studyEntry(entry);
      await renderStudy();
    }
    setStatus(`Study analysed: ${n} recordings.`);
  } catch (e) {
    showError('input-error', e);
  } finally {
    setBusy(false);
    $('study-run').disabled = false;
  }
}

/** Opens study recording `i` in the steps below (its own settings can then be changed and
 * its analysis run again; the study table takes the new result). */
async function openStudyRecording(i) {
  const study = state.study;
  const m = study.matches[i];
  const row = study.manifest.rows[i];
  const data = { ...study.files[m.data], name: row.data };
  const layout = { ...study.files[m.layout], name: row.layout };
  state.truthText = null;
  state.layout = layout;
  state.sidecar = m.sidecar == null ? null : study.files[m.sidecar];
  state.stimuli = m.stimuli == null ? null : { ...study.files[m.stimuli], name: row.stimuli };
  if (data.kind === 'voltage') {
    state.voltage = data;
    state.activity = null;
  } else {
    state.activity = data;
    state.voltage = null;
  }
  study.open = i;
  await renderStudy();
  await openChosen();
}

/** After an analysis in the steps below: the open study recording takes its result. */
async function updateOpenStudyRecording() {
  const study = state.study;
  if (!study || study.open === null) return;
  const entry = await call('studyEntry', { manifest: study.manifest, row: study.open });
  study.entries[study.open] = studyEntry(entry);
  await renderStudy();
}

/** The study's tables (status, recordings, bursts, fronts) from the core, as `ringline
 * batch` writes them. */
async function studyTables() {
  const study = state.study;
  const outputs = study.manifest.rows.map((row, i) => {
    const e = study.entries[i];
    const file = (name) => e.files.find((f) => f[0] === name)?.[1] ?? null;
    return {
      folder: row.recording, status_json: e.status_json, summary_json: file('summary.json'),
      bursts_csv: file('bursts.csv'), fronts_csv: file('fronts.csv'),
    };
  });
  return call('combineStudy', { outputs });
}

/** Saves the study tables: the bytes `ringline batch` writes for the same manifest. */
async function saveStudy() {
  const tables = await studyTables();
  for (const [name, text] of tables.files) download(name, text, 'text/csv');
}

/** Compares the study's conditions (the core does every number, as `ringline compare`). */
async function compareStudy(event) {
  event.preventDefault();
  clearError('input-error');
  const f = $('compare-form').elements;
  const tables = await studyTables();
  const recordings = tables.files.find((x) => x[0] === 'recordings.csv')[1];
  const fronts = tables.files.find((x) => x[0] === 'fronts.csv')?.[1] ?? null;
  const bursts = tables.files.find((x) => x[0] === 'bursts.csv')?.[1] ?? null;
  const metrics = f.metrics.value.split(',').map((m) => m.trim()).filter((m) => m);
  const settings = { by: f.by.value, unit: f.unit.value || null, paired: f.paired.checked, adjustment: f.adjustment.value, metrics };
  const compared = await call('compareStudy', { recordings, fronts, bursts, settings });
  state.comparison = compared;
  const r = compared.report;
  $('compare-text').textContent = compared.sentence;
  fillTable($('compare-table'), compared.table);
  const select = $('compare-metric');
  select.replaceChildren();
  for (const m of r.units) select.append(new Option(m.metric, m.metric));
  $('compare-results').hidden = false;
  $('compare-save').disabled = false;
  $('compare-report').disabled = false;
  showEstimation();
}

/** Shows the chosen metric's estimation plot, and its curve over the levels when ordered. */
function showEstimation() {
  const metric = $('compare-metric').value;
  for (const [id, name] of [['fig-estimation', `estimation-${metric}.svg`], ['fig-levels', `levels-${metric}.svg`]]) {
    const file = state.comparison?.files.find((x) => x[0] === name);
    const img = $(id);
    img.closest('figure').hidden = !file;
    if (!file) continue;
    const old = img.src;
    img.src = URL.createObjectURL(new Blob([file[1]], { type: 'image/svg+xml' }));
    if (old.startsWith('blob:')) URL.revokeObjectURL(old);
  }
}

// ---------------------------------------------------------------- exports

function download(name, text, type) {
  const a = document.createElement('a');
  a.href = URL.createObjectURL(new Blob([text], { type }));
  a.download = name;
  document.body.append(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(a.href), 10000);
}

async function exportTable(event) {
  const name = event.currentTarget.dataset.name;
  const exports = await call('exports');
  const file = exports?.find((f) => f[0] === name);
  if (!file) return;
  download(name, file[1], name.endsWith('.json') ? 'application/json' : 'text/csv');
}

function exportSvg(event) {
  const name = event.currentTarget.dataset.figure;
  const svg = state.svgs[name];
  if (svg) download(`${state.fileStem}-${name}.svg`, svg, 'image/svg+xml');
}

/** The study as a notebook keeps it: manifest, each recording's status and output files. */
function studyForNotebook() {
  const study = state.study;
  if (!study) return null;
  return {
    manifest: study.manifest,
    recordings: study.entries.map((e) => (e ? { status_json: e.status_json, files: e.files } : null)),
    open: study.open,
  };
}

async function saveNotebook() {
  const text = await call('notebook', { study: studyForNotebook() });
  download(`${state.fileStem}.ringline.json`, text, 'application/json');
  const said = await call('notebookNote');
  const note = $('notebook-note');
  note.hidden = !said;
  note.textContent = said ?? '';
}

// ---------------------------------------------------------------- autosave

// The session (the notebook of the open recording and study, which names its files by
// SHA-256) is kept in this browser's IndexedDB as the user works; each file's bytes are kept
// once, under its digest. Nothing leaves the computer.
const SESSION_DB = 'ringline-session';
let autosaveTimer = null;
let autosaveRunning = Promise.resolve();
let autosaveOff = false;

function openSessionDb() {
  return new Promise((resolve, reject) => {
    if (typeof indexedDB === 'undefined') {
      reject(new Error('this browser offers no IndexedDB here'));
      return;
    }
    const request = indexedDB.open(SESSION_DB, 1);
    request.onupgradeneeded = () => {
      request.result.createObjectStore('files');
      request.result.createObjectStore('session');
    };
    request.onsuccess = () => resolve(request.result);
    request.onerror = () => reject(request.error);
  });
}

/** Runs `work(stores)` in one transaction; resolves when it commits. */
function inTransaction(db, mode, work) {
  return new Promise((resolve, reject) => {
    const t = db.transaction(['files', 'session'], mode);
    let result;
    t.oncomplete = () => resolve(result);
    t.onabort = () => reject(t.error ?? new Error('the browser refused to store the session'));
    t.onerror = () => {};
    Promise.resolve(work({ files: t.objectStore('files'), session: t.objectStore('session') }))
      .then((r) => { result = r; }, (e) => { try { t.abort(); } catch { /* already over */ } reject(e); });
  });
}

const asPromise = (request) => new Promise((resolve, reject) => {
  request.onsuccess = () => resolve(request.result);
  request.onerror = () => reject(request.error);
});

function setAutosaveStatus(text, isProblem = false) {
  const el = $('autosave-status');
  el.textContent = text;
  el.classList.toggle('problem', isProblem);
}

function scheduleAutosave() {
  if (autosaveOff || !state.inspection) return;
  clearTimeout(autosaveTimer);
  autosaveTimer = setTimeout(() => {
    autosaveRunning = autosaveRunning.then(autosave, autosave);
  }, 400);
}

async function autosave() {
  if (!state.inspection) return;
  try {
    const notebook = await call('notebook', { study: studyForNotebook(), embed: false });
    const files = await call('inputFiles');
    const db = await openSessionDb();
    const stored = await inTransaction(db, 'readonly', ({ files: store }) => asPromise(store.getAllKeys()));
    const fresh = [];
    // A file the page holds as a File is stored as that Blob (the browser copies it to disk,
    // not through the tab's memory); others are asked of the core.
    const held = { activity: state.activity?.file, layout: state.layout?.file, stimuli: state.stimuli?.file };
    for (const f of files) {
      if (stored.includes(f.sha256)) continue;
      const blob = held[f.role];
      const bytes = blob && blob.size === f.size_bytes && blob.name === f.name ? blob : await call('inputBytes', { role: f.role });
      fresh.push([f.sha256, { name: f.name, bytes }]);
    }
    const what = `${files.map((f) => f.name).join(' + ')}${state.report ? `, analysed (${state.report.bursts.length} bursts)` : ', not analysed yet'}`
      + `${state.study ? `; a study of ${state.study.manifest.rows.length} recordings` : ''}`;
    const savedAt = new Date();
    await inTransaction(db, 'readwrite', ({ files: store, session }) => {
      for (const [key, value] of fresh) store.put(value, key);
      // Bytes no longer named by the session are let go.
      for (const key of stored) if (!files.some((f) => f.sha256 === key)) store.delete(key);
      session.put({ saved_at: savedAt.toISOString(), what, notebook, files }, 'current');
    });
    db.close();
    setAutosaveStatus(`Session kept in this browser at ${savedAt.toLocaleTimeString()}.`);
  } catch (e) {
    if (e?.name === 'QuotaExceededError') {
      autosaveOff = true;
      setAutosaveStatus('Autosave stopped: this browser\'s storage for the page is full. '
        + 'The open session is unaffected; save a notebook to keep it.', true);
    } else {
      setAutosaveStatus(`The session could not be kept in this browser (${e?.message ?? e}); save a notebook to keep it.`, true);
    }
  }
}

/** On load: offers the session kept in this browser, saying what and from when. */
async function offerRestore() {
  let kept;
  try {
    const db = await openSessionDb();
    kept = await inTransaction(db, 'readonly', ({ session }) => asPromise(session.get('current')));
    db.close();
  } catch (e) {
    setAutosaveStatus(`This browser does not let the page keep a session here (${e?.message ?? e}); `
      + 'save a notebook to keep your work.', true);
    autosaveOff = true;
    return;
  }
  if (!kept) return;
  $('restore-text').textContent = `A session kept in this browser on ${new Date(kept.saved_at).toLocaleString()}: ${kept.what}.`;
  $('restore').hidden = false;
  $('restore-button').focus();
}

async function restoreSession() {
  $('restore').hidden = true;
  try {
    const db = await openSessionDb();
    const { kept, files } = await inTransaction(db, 'readonly', async ({ files: store, session }) => {
      const k = await asPromise(session.get('current'));
      const bytes = [];
      for (const f of k.files) {
        const v = await asPromise(store.get(f.sha256));
        if (v) bytes.push([v.name, v.bytes]);
      }
      return { kept: k, files: bytes };
    });
    db.close();
    for (const pair of files) if (pair[1] instanceof Blob) pair[1] = await pair[1].arrayBuffer();
    const entry = { name: 'the session kept in this browser', size: kept.notebook.length, bytes: new TextEncoder().encode(kept.notebook).buffer, kind: 'notebook', status: '' };
    state.files = [entry];
    await openNotebook(entry, files);
    $('summary-table').focus();
  } catch (e) {
    showError('input-error', e);
  }
}

async function clearSession() {
  $('restore').hidden = true;
  try {
    const db = await openSessionDb();
    await inTransaction(db, 'readwrite', ({ files, session }) => { files.clear(); session.clear(); });
    db.close();
    setAutosaveStatus('The kept session was cleared from this browser.');
  } catch (e) {
    setAutosaveStatus(`The kept session could not be cleared (${e?.message ?? e}).`, true);
  }
}

// ---------------------------------------------------------------- wiring

const READOUT_HINT = 'Point at a site, or focus the figure and press Up or Down, to read its values.';
let readoutIndex = -1;

/** Up and Down on the focused activation figure read its sites one by one (announced). */
async function stepReadout(delta) {
  const first = await call('readoutPoint', { index: 0 });
  if (!first) return;
  readoutIndex = (readoutIndex + delta + first.count) % first.count;
  const point = await call('readoutPoint', { index: readoutIndex });
  $('readout').textContent = `${readoutIndex + 1} of ${first.count}: ${point.label}`;
}

/** Drag across the raster or the rate to zoom both to that time span (the core turns the
 * pixels into seconds and redraws); double-click to go back to the first 30 s. */
function wireZoom(name) {
  const img = $(`fig-${name}`);
  const figure = img.closest('figure');
  const band = document.createElement('div');
  band.className = 'zoom-band';
  band.hidden = true;
  figure.append(band);
  let start = null;
  const figurePx = (e) => {
    const box = img.getBoundingClientRect();
    return { x: (e.clientX - box.left) * (Number(img.dataset.widthPx) / box.width), left: e.clientX - figure.getBoundingClientRect().left };
  };
  img.addEventListener('pointerdown', (e) => {
    if (e.button !== 0 || !state.report) return;
    e.preventDefault();
    img.setPointerCapture(e.pointerId);
    start = figurePx(e);
    Object.assign(band.style, { left: `${start.left}px`, width: '0px', top: `${img.offsetTop}px`, height: `${img.offsetHeight}px` });
    band.hidden = false;
  });
  img.addEventListener('pointermove', (e) => {
    if (!start) return;
    const now = figurePx(e);
    band.style.left = `${Math.min(start.left, now.left)}px`;
    band.style.width = `${Math.abs(now.left - start.left)}px`;
  });
  img.addEventListener('pointerup', async (e) => {
    if (!start) return;
    const from = start.x;
    const to = figurePx(e).x;
    start = null;
    band.hidden = true;
    if (Math.abs(to - from) < 4) return;
    try {
      state.settings.view = await call('zoom', { figure: name, from, to });
      await showWindow();
    } catch (err) {
      showError('analysis-error', err);
    }
  });
  img.addEventListener('dblclick', async () => {
    if (!state.report) return;
    const view = { ...state.settings.view, window_s: null };
    await call('setView', { view });
    state.settings.view = view;
    await showWindow();
  });
}

/** Redraws the raster and rate for the view's window and fills the window fields. */
async function showWindow() {
  const w = $('window-form').elements;
  const [from, to] = state.settings.view.window_s ?? ['', ''];
  w.from.value = from;
  w.to.value = to;
  scheduleAutosave();
  for (const name of ['raster', 'population_rate']) await drawFigure(name);
  await renderEvidence();
}

/** Every Save SVG button is named after its figure, for screen readers and voice control. */
function nameSaveButtons() {
  for (const b of document.querySelectorAll('.svg-save')) {
    const img = b.closest('figure')?.querySelector('img');
    if (img && !b.hasAttribute('aria-label')) b.setAttribute('aria-label', `Save SVG: ${img.alt.split(';')[0]}`);
  }
}

function wire() {
  const drop = $('drop-zone');
  drop.addEventListener('dragover', (e) => { e.preventDefault(); drop.classList.add('over'); });
  drop.addEventListener('dragleave', () => drop.classList.remove('over'));
  drop.addEventListener('keydown', (e) => {
    if (e.target === drop && (e.key === 'Enter' || e.key === ' ')) {
      e.preventDefault();
      $('file-input').click();
    }
  });
  $('choose-button').addEventListener('click', () => $('file-input').click());
  wireZoom('raster');
  wireZoom('population_rate');
  $('evidence-site').addEventListener('change', () => renderEvidence().catch((e) => showError('analysis-error', e)));
  nameSaveButtons();
  drop.addEventListener('drop', (e) => {
    e.preventDefault();
    drop.classList.remove('over');
    state.truthText = null;
    addFiles([...e.dataTransfer.files], { asStudy: true }).catch((err) => showError('input-error', err));
  });
  $('file-input').addEventListener('change', (e) => {
    state.truthText = null;
    addFiles([...e.target.files], { asStudy: true }).catch((err) => showError('input-error', err));
    e.target.value = '';
  });
  $('demo-button').addEventListener('click', () => {
    state.truthText = null;
    useDemo().catch((err) => showError('input-error', err));
  });
  $('sim-form').addEventListener('submit', simulateCulture);
  $('sim-cancel').addEventListener('click', () => restartWorker('Simulation cancelled.'));
  for (const b of document.querySelectorAll('.sim-save')) {
    b.addEventListener('click', () => {
      const name = b.dataset.file;
      if (state.simulated?.[name]) download(name, state.simulated[name], 'application/json');
    });
  }
  $('track-form').addEventListener('submit', refitTrack);
  for (const [name, field] of [['interval_histogram', 'interval-bins'], ['speed_histogram', 'speed-bins']]) {
    $(field).addEventListener('change', () => drawHistogram(name, field).catch((e) => showError('analysis-error', e)));
  }
  $('track-form').elements.kind.addEventListener('change', (e) => { $('waypoints-field').hidden = e.target.value !== 'polyline'; });
  $('burst-form').addEventListener('submit', runAnalysis);
  $('window-form').addEventListener('submit', setWindow);
  $('study-run').addEventListener('click', () => runStudy());
  $('study-save').addEventListener('click', () => saveStudy().catch((e) => showError('input-error', e)));
  $('compare-form').addEventListener('submit', (e) => compareStudy(e).catch((err) => showError('input-error', err)));
  $('compare-metric').addEventListener('change', showEstimation);
  $('response-site').addEventListener('change', () => drawResponseCurve().catch((e) => showError('input-error', e)));
  $('compare-report').addEventListener('click', () => {
    if (state.comparison) download('study-report.html', state.comparison.report_html, 'text/html');
  });
  $('compare-save').addEventListener('click', () => {
    const file = state.comparison?.files.find((x) => x[0] === 'comparisons.csv');
    if (file) download('comparisons.csv', file[1], 'text/csv');
  });
  for (const [button, prefix] of [['estimation-save', 'estimation'], ['levels-save', 'levels']]) {
    $(button).addEventListener('click', () => {
      const name = `${prefix}-${$('compare-metric').value}.svg`;
      const file = state.comparison?.files.find((x) => x[0] === name);
      if (file) download(name, file[1], 'image/svg+xml');
    });
  }
  $('cancel-button').addEventListener('click', () => {
    setBusy(false);
    if (state.importing) {
      // Nothing to re-open: the recording was still being read.
      state.activity.status = 'reading cancelled: drop or choose it again to open it';
      state.activity = null;
      renderFiles();
      restartWorker('Reading cancelled.');
      return;
    }
    const detecting = state.voltage && !state.inspection;
    restartWorker(detecting
      ? 'Spike detection cancelled.'
      : 'Cancelled; the files are still open, run the analysis again when ready.');
  });
  $('prev-burst').addEventListener('click', () => selectBurst(Number($('burst-number').value) - 1));
  $('next-burst').addEventListener('click', () => selectBurst(Number($('burst-number').value) + 1));
  $('burst-number').addEventListener('change', (e) => selectBurst(Number(e.target.value)));
  document.addEventListener('keydown', (e) => {
    if (!state.report || ['INPUT', 'SELECT', 'TEXTAREA'].includes(document.activeElement?.tagName)) return;
    if (e.key === 'ArrowLeft') selectBurst(Number($('burst-number').value) - 1);
    if (e.key === 'ArrowRight') selectBurst(Number($('burst-number').value) + 1);
  });
  const activation = $('fig-activation');
  activation.addEventListener('keydown', (e) => {
    if (e.key === 'ArrowDown' || e.key === 'ArrowUp') {
      e.preventDefault();
      stepReadout(e.key === 'ArrowDown' ? 1 : -1).catch((err) => showError('analysis-error', err));
    }
  });
  activation.addEventListener('pointermove', async (e) => {
    const box = activation.getBoundingClientRect();
    const x = (e.clientX - box.left) * (Number(activation.dataset.widthPx) / box.width);
    const y = (e.clientY - box.top) * (Number(activation.dataset.heightPx) / box.height);
    const label = await call('readout', { x, y });
    $('readout').textContent = label ?? READOUT_HINT;
  });
  for (const b of document.querySelectorAll('[data-export]')) b.addEventListener('click', exportTable);
  for (const b of document.querySelectorAll('.svg-save')) b.addEventListener('click', exportSvg);
  $('save-notebook').addEventListener('click', saveNotebook);
  $('restore-button').addEventListener('click', restoreSession);
  $('restore-clear').addEventListener('click', clearSession);
  $('save-report').addEventListener('click', () => saveReport().catch((e) => showError('analysis-error', e)));
}

// For the page's own tests: the bridge, to reach the core the way the page does.
window.ringline = { call, state, restartWorker };

wire();
startWorker();
ready.then(offerRestore, () => {});
