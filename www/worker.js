// The worker that holds ringline's wasm core. It only passes messages to the core and back:
// every number, figure and file comes from Rust. One workbook (files, settings, results) lives
// here; the page replaces the whole worker to cancel a long step or recover from a crash.

// ringline-core-import-begin
import init, * as core from './pkg/ringline.js';
const loadCore = () => init({ module_or_path: new URL('./pkg/ringline_bg.wasm', import.meta.url) });
// ringline-core-import-end

let workbook = null;
let voltageFile = null; // the raw voltage File the open workbook's spikes came from
let voltageHashed = false; // its SHA-256 is in the workbook (read once, not per report)

function reply(id, value) {
  postMessage({ id, ok: true, value });
}

function fail(id, error) {
  // Errors from the core are { message, place?, ... } objects or strings.
  let message;
  if (error instanceof WebAssembly.RuntimeError) {
    const panic = safe(() => core.lastPanic());
    message = `The analysis core stopped unexpectedly${panic ? `: ${panic}` : ''}. It will be restarted.`;
    postMessage({ id, ok: false, error: { message }, crashed: true });
    return;
  }
  if (error && typeof error === 'object' && ('text' in error || 'message' in error)) {
    // Core errors carry `text`, the located sentence the command line prints.
    message = String(error.text ?? error.message);
  } else {
    message = String(error);
  }
  postMessage({ id, ok: false, error: { message, detail: plain(error) } });
}

function safe(f) {
  try { return f(); } catch { return ''; }
}

function plain(value) {
  try { return JSON.parse(JSON.stringify(value)); } catch { return null; }
}

function progress(id) {
  return (done, total) => postMessage({ id, progress: [done, total], stage: 'analysing bursts' });
}

function need() {
  if (!workbook) throw { message: 'Open a recording first.' };
  return workbook;
}

const ops = {
  defaults: () => core.defaultSettings(),
  demo: () => core.demoFiles(),
  classify: ({ name, head }) => core.classifyInput(name, new Uint8Array(head)),
  whyUnrecognised: ({ name, head }) => core.whyUnrecognised(name, new Uint8Array(head)),
  readManifest: ({ name, bytes }) => core.readManifest(name, new Uint8Array(bytes)),
  manifestForFiles: ({ files }) => core.manifestForFiles(files),
  matchStudy: ({ manifest, names }) => core.matchStudyFiles(manifest, names),
  studyRecording: ({ manifest, row, name, file, sidecar, layout, layer, stimuli, settings }, id) => {
    // Only this recording is read, and voltage only block by block.
    const reader = new FileReaderSync();
    const slice = (a, b) => new Uint8Array(reader.readAsArrayBuffer(file.slice(a, b)));
    return core.analyzeStudyRecording(
      manifest, row, name, slice(0, Math.min(65536, file.size)), file.size, slice,
      sidecar?.name, sidecar ? new Uint8Array(sidecar.bytes) : undefined,
      layout.name, new Uint8Array(layout.bytes), layer?.name, layer?.text,
      stimuli?.name, stimuli ? new Uint8Array(stimuli.bytes) : undefined, settings ?? null,
      (stage, done, total) => postMessage({ id, progress: [done, total], stage }),
    );
  },
  failedStudyEntry: ({ manifest, row, message }) => core.failedStudyEntry(manifest, row, message),
  studyEntry: ({ manifest, row }) => need().studyEntry(manifest, row),
  combineStudy: ({ outputs }) => core.combineStudy(outputs),
  studyView: ({ manifest, rows }) => core.studyView(manifest, rows),
  compareStudy: ({ recordings, fronts, bursts, settings }) => core.compareStudy(recordings, fronts, bursts, settings),
  open: ({ activity, layout, settings }, id) => {
    workbook?.free();
    workbook = null;
    voltageFile = null;
    if (activity.file) {
      // Read in pieces straight from the File: the page's main thread never holds it.
      const reader = new FileReaderSync();
      const slice = (a, b) => new Uint8Array(reader.readAsArrayBuffer(activity.file.slice(a, b)));
      workbook = core.Workbook.fromFile(activity.name, activity.file.size, slice,
        layout.name, new Uint8Array(layout.bytes), settings ?? null,
        (stage, done, total) => postMessage({ id, progress: [done, total], stage }));
    } else {
      workbook = new core.Workbook(activity.name, new Uint8Array(activity.bytes),
        layout.name, new Uint8Array(layout.bytes), settings ?? null);
    }
    return { inspection: workbook.inspection(), settings: workbook.settings() };
  },
  openNotebook: ({ name, bytes, files }, id) => {
    workbook?.free();
    workbook = null;
    voltageFile = null;
    const given = files ? files.map(([n, b]) => [n, new Uint8Array(b)]) : null;
    workbook = core.Workbook.fromNotebook(name, new Uint8Array(bytes), given, progress(id));
    return { inspection: workbook.inspection(), settings: workbook.settings(), report: workbook.report() };
  },
  openVoltage: ({ file, sidecar, layout, settings }, id) => {
    workbook?.free();
    workbook = null;
    // Synchronous slices of the File: the core asks for blocks as it goes, so a file of any
    // size streams through without being held whole.
    const reader = new FileReaderSync();
    const slice = (a, b) => new Uint8Array(reader.readAsArrayBuffer(file.slice(a, b)));
    const head = slice(0, Math.min(65536, file.size));
    const opened = core.Workbook.fromVoltage(
      file.name, head, file.size,
      sidecar ? sidecar.name : undefined, sidecar ? new Uint8Array(sidecar.bytes) : undefined,
      layout.name, new Uint8Array(layout.bytes), settings ?? null, slice,
      (done, total) => postMessage({ id, progress: [done, total], stage: 'detecting spikes' }),
    );
    workbook = opened.takeWorkbook();
    voltageFile = file;
    voltageHashed = false;
    const electrodes = opened.electrodes();
    opened.free();
    return { inspection: workbook.inspection(), settings: workbook.settings(), electrodes };
  },
  setTrack: ({ track }) => need().setTrack(track),
  attachStimuli: ({ name, bytes }) => need().attachStimuli(name, new Uint8Array(bytes)),
  analyze: ({ analysis }, id) => need().analyze(analysis, progress(id)),
  setView: ({ view }) => need().setView(view),
  zoom: ({ figure, from, to }) => need().zoom(figure, from, to),
  evidence: ({ site, width, height }) => {
    const reader = voltageFile && new FileReaderSync();
    const slice = voltageFile && ((a, b) => new Uint8Array(reader.readAsArrayBuffer(voltageFile.slice(a, b))));
    return need().evidence(site, slice ?? undefined, width, height);
  },
  settings: () => need().settings(),
  figure: ({ figure, width, height, extra }) => need().figure({ figure, ...(extra ?? {}) }, width, height),
  readout: ({ x, y }) => need().readout(x, y) ?? null,
  readoutPoint: ({ index }) => need().readoutPoint(index) ?? null,
  exports: () => need().exports(),
  summaryFacts: () => need().summaryFacts(),
  words: ({ burst }) => need().words(burst ?? 0),
  reportHtml: (_, id) => {
    const book = need();
    if (voltageFile && !voltageHashed) {
      // The report names the voltage file by its SHA-256: read it in 8 MiB pieces, once.
      const reader = new FileReaderSync();
      const hash = new core.Sha256Stream();
      const piece = 8 << 20;
      for (let at = 0; at < voltageFile.size; at += piece) {
        hash.update(new Uint8Array(reader.readAsArrayBuffer(voltageFile.slice(at, at + piece))));
        postMessage({ id, progress: [Math.min(at + piece, voltageFile.size), voltageFile.size], stage: 'reading the voltage file for its SHA-256' });
      }
      book.setVoltageSha256(hash.finish());
      hash.free();
      voltageHashed = true;
    }
    return book.reportHtml();
  },
  notebook: ({ study, embed = true }) => need().notebookJson(study ?? null, embed),
  inputFiles: () => need().inputFiles(),
  notebookNote: () => need().notebookNote() ?? null,
  inputBytes: ({ role }) => need().inputBytes(role),
  notebookStudy: ({ name, bytes }) => core.notebookStudy(name, new Uint8Array(bytes)),
  compareTruth: ({ truth }) => need().compareTruth(truth),
  simulate: ({ scenario }, id) => core.simulate(scenario, (stage, done, total) => postMessage({ id, progress: [done, total], stage })),
  simulateCulture: ({ options }, id) => core.simulateCulture(options, (stage, done, total) => postMessage({ id, progress: [done, total], stage })),
  panic: () => core.panicForTest(),
};

let ready = loadCore().then(
  () => postMessage({ ready: true }),
  (error) => postMessage({ ready: false, error: { message: `The analysis core could not start: ${error}` } }),
);

onmessage = async (event) => {
  const { id, op, args } = event.data;
  await ready;
  const f = ops[op];
  if (!f) {
    fail(id, `unknown operation ${op}`);
    return;
  }
  try {
    reply(id, f(args ?? {}, id));
  } catch (error) {
    fail(id, error);
  }
};
