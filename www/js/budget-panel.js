// The format budget panel ("Formats by cost"): every rate × export the core considers for this sound and chain
// (src/budget.rs, the CLI's `stairstep budget`), measured in the worker one candidate at a time, shown as a sortable
// table and a size-quality plot with the Pareto front; a byte or kbit/s limit highlights the best candidate within
// it, and one click makes that candidate's complete preset the page's (an undoable edit).
//
// Off the critical path: a measurement starts only while the panel is open, after an edit's render has been drawn,
// and yields to every other request in the worker between two candidates. Results are kept per sound and chain (the
// whole preset), so going back to earlier settings shows them at once. A chain edit or a new sound cancels a
// measurement under way and clears the table at once, so no figure of other settings is ever on screen.
import { $, el, setStatus } from './util.js';
import { state } from './state.js';
import { call, onWorkerMessage } from './worker-client.js';
import { requestRender } from './session.js';
import { renderChain } from './chain-editor.js';
import { renderPrep } from './prep-panel.js';
import { renderExport } from './export.js';
import { budgetTable } from './views/budget-table.js';
import { drawBudgetPlot } from './views/budget-plot.js';

const CACHE_SIZE = 12; // results kept (sound × chain)

export const budget = {
  open: false,
  sourceGen: 0, // counts loads: part of every result's key
  cache: new Map(), // key → { candidates, skipped, source_rate, duration_s, ms }
  running: null, // { key, token, done, total }
  shown: null, // { key, result, pareto, pick }: what the table and plot show
  limit: { kind: 'none' }, // as the core's budget::Limit reads it
  score: 'a_weighted_snr_db',
  sort: { key: 'bytes', dir: 1 },
  runs: 0, // measurements started (for tests)
  cancels: 0, // measurements cancelled (for tests)
};
window.stairstepBudget = budget; // for tests and the curious

let nextToken = 1;
const keyFor = (presetJson) => `${budget.sourceGen}\n${presetJson}`;
budget.currentKey = () => keyFor(JSON.stringify(state.preset)); // the key of the settings being edited

function setupPanelDom() {
  const panel = $('budget-panel');
  // "Best within [8192] [bytes]": the limit's value, then its unit (or no limit).
  const kind = el('select', { id: 'budget-limit-kind', 'aria-label': 'Unit of the limit', onchange: limitChanged },
    el('option', { value: 'none' }, 'no limit'), el('option', { value: 'max-bytes' }, 'bytes'),
    el('option', { value: 'max-kbps' }, 'kbit/s'));
  const value = el('input', { id: 'budget-limit', type: 'number', min: '1', step: 'any',
    placeholder: '—', onchange: () => limitChanged(true) });
  value.addEventListener('keydown', (e) => { if (e.key === 'Enter') limitChanged(true); });
  const score = el('select', { id: 'budget-score', onchange: () => { budget.score = score.value; updatePick(); } },
    el('option', { value: 'a_weighted_snr_db' }, 'A-weighted SNR'), el('option', { value: 'sqnr_db' }, 'SQNR'));
  panel.replaceChildren(
    el('div', { class: 'budget-head' },
      el('h2', { id: 'budget-h' }, 'Formats by cost'),
      el('span', { class: 'budget-group' }, el('label', { for: 'budget-limit' }, 'Best within'), value, kind),
      el('span', { class: 'budget-group' }, el('label', { for: 'budget-score' }, 'ranked by'), score),
      el('span', { class: 'budget-group' },
        el('button', { type: 'button', id: 'budget-apply', class: 'primary', disabled: true, onclick: applyPick,
          title: 'Make the pick\'s rate and export the chain\'s (undo with Ctrl+Z)' }, 'Use the pick'),
        el('button', { type: 'button', id: 'budget-close', 'aria-label': 'Close the formats by cost panel',
          title: 'Close', onclick: () => toggle(false) }, '✕'))),
    el('div', { class: 'budget-status' },
      el('progress', { id: 'budget-progress', max: '1', value: '0', 'aria-label': 'Candidates measured', hidden: true }),
      el('span', { id: 'budget-note', class: 'dim' }),
      el('span', { id: 'budget-pick', class: 'budget-pick', 'aria-live': 'polite' })),
    el('div', { class: 'budget-body' },
      el('div', { id: 'budget-table-wrap', class: 'budget-table-wrap', tabindex: '0', role: 'region',
        'aria-label': 'Candidates, one row per rate and export' }),
      el('figure', { class: 'budget-fig' },
        el('figcaption', {}, el('span', { id: 'budget-plot-title' }, 'Score against size'),
          el('span', { class: 'key dot' }, 'front'), el('span', { class: 'key square' }, 'current'),
          el('span', { class: 'key ring' }, 'pick')),
        el('div', { class: 'plot' }, el('canvas', { id: 'budget-plot', role: 'img', width: '400', height: '200',
          'aria-label': 'Score in dB against file size in bytes (log scale) for every candidate, the Pareto front as a line' })))));
  new ResizeObserver(() => { if (budget.open) drawBudget(); }).observe(panel.querySelector('.budget-fig .plot'));
}

export function setupBudget() {
  setupPanelDom();
  $('budget-toggle').onclick = () => toggle(!budget.open);
  onWorkerMessage('budget-progress', (msg) => {
    const job = budget.running;
    if (!job || job.token !== msg.token) return;
    job.done = msg.done;
    job.total = msg.total;
    showProgress();
  });
}

function toggle(open) {
  budget.open = open;
  $('budget-panel').hidden = !open;
  $('budget-toggle').setAttribute('aria-expanded', String(open));
  if (open) { drawBudget(); startWhenIdle(false); $('budget-limit-kind').focus(); } else { cancel(); $('budget-toggle').focus(); }
}

// Before every render request (hooks.presetChanged): a measurement or a table of other settings goes.
export function budgetChainChanged() {
  const key = keyFor(JSON.stringify(state.preset));
  if (budget.running && budget.running.key !== key) cancel();
  if (budget.shown && budget.shown.key !== key) { budget.shown = null; drawBudget(); }
}

// A new sound: nothing measured before applies.
export function budgetSourceLoaded() {
  budget.sourceGen++;
  budget.running = null; // the worker ends its job itself when a load arrives
  budget.shown = null;
  drawBudget();
}

// After a render has been drawn (hooks.rendered): once the browser has painted it, measure (or show the kept
// result) for the settings it was made with.
export function budgetRendered() {
  if (budget.open) startWhenIdle();
}

// A measurement starts once an edit's render has been painted and no other edit followed for SETTLE_MS (a slider
// being dragged does not start one per step); kept results are shown as soon as the render is painted.
const SETTLE_MS = 250;
let startTimer = 0;
function startWhenIdle(settle = true) {
  requestAnimationFrame(() => {
    clearTimeout(startTimer);
    const kept = state.renderedPreset && budget.cache.has(keyFor(state.renderedPreset));
    startTimer = setTimeout(start, kept || !settle ? 0 : SETTLE_MS);
  });
}

function start() {
  if (!budget.open || !state.renderedPreset) return;
  const presetJson = state.renderedPreset;
  if (presetJson !== JSON.stringify(state.preset)) return; // an edit is on its way: its render will call again
  const key = keyFor(presetJson);
  if (budget.shown?.key === key) return;
  const kept = budget.cache.get(key);
  if (kept) { show(key, kept); return; }
  if (budget.running?.key === key) return;
  if (budget.running) cancel();
  const job = { key, token: nextToken++, done: 0, total: 0 };
  budget.running = job;
  budget.runs++;
  drawBudget();
  showProgress();
  call('budget', { preset: presetJson, token: job.token }).then((msg) => {
    if (budget.running !== job) return;
    budget.running = null;
    const result = { candidates: msg.candidates, skipped: msg.skipped, source_rate: msg.source_rate,
      duration_s: msg.duration_s, ms: msg.ms };
    budget.cache.set(key, result);
    if (budget.cache.size > CACHE_SIZE) budget.cache.delete(budget.cache.keys().next().value);
    show(key, result);
  }).catch((err) => {
    if (budget.running !== job) return; // cancelled: nothing to say
    budget.running = null;
    if (/^cancelled/.test(err.message)) { showProgress(); return; } // by the worker (a new sound is loading)
    $('budget-note').textContent = `The candidates could not be measured: ${err.message}`;
    showProgress();
  });
}

function cancel() {
  if (!budget.running) return;
  budget.running = null;
  budget.cancels++;
  call('budget-cancel').catch(() => {});
  showProgress();
}

function show(key, result) {
  budget.shown = { key, result, pareto: null, pick: null };
  showProgress();
  drawBudget();
  updatePick();
}

// typed: the number was typed (with no unit chosen yet, it is taken as bytes).
function limitChanged(typed = false) {
  const box = $('budget-limit');
  if (typed && box.value !== '' && $('budget-limit-kind').value === 'none') $('budget-limit-kind').value = 'max-bytes';
  const kind = $('budget-limit-kind').value;
  const v = +box.value;
  const ok = kind === 'none' || (box.value !== '' && Number.isFinite(v) && v > 0);
  box.toggleAttribute('aria-invalid', !ok && box.value !== '');
  if (!ok) return;
  budget.limit = kind === 'none' ? { kind } : { kind, value: kind === 'max-bytes' ? Math.floor(v) : v };
  updatePick();
}

// The front and the pick, from the core (budget::mark_pareto and budget::pick), for the shown result.
function updatePick() {
  const shown = budget.shown;
  if (!shown) return;
  call('budget-pick', { candidates: JSON.stringify(shown.result.candidates), score: budget.score,
    limit: JSON.stringify(budget.limit) }).then((msg) => {
    if (budget.shown !== shown) return;
    shown.pareto = msg.pareto;
    shown.pick = msg.pick;
    shown.limit = budget.limit;
    shown.score = budget.score;
    drawBudget();
  }).catch((err) => setStatus(`Budget: ${err.message}`, 'error'));
}

function showProgress() {
  const job = budget.running;
  const bar = $('budget-progress');
  bar.hidden = !job;
  if (job) {
    bar.max = Math.max(1, job.total);
    bar.value = job.done;
    $('budget-note').textContent = job.total ? `Measuring candidate ${job.done} of ${job.total}…` : 'Measuring…';
  }
}

function applyPick() {
  const shown = budget.shown;
  if (!shown || shown.pick === null) return;
  const c = shown.result.candidates[shown.pick];
  state.preset = structuredClone(c.preset);
  state.preset.prep ??= {};
  renderPrep();
  renderChain();
  renderExport();
  requestRender();
  setStatus(`Now ${c.rate_hz.toLocaleString('en')} Hz, ${c.export_label}: ${c.bytes.toLocaleString('en')} bytes. ` +
    'Undo (Ctrl+Z) brings the previous settings back.');
}

export function drawBudget() {
  if (!budget.open) return;
  const shown = budget.shown;
  const wrap = $('budget-table-wrap');
  const ready = shown && shown.pareto;
  $('budget-apply').disabled = !(ready && shown.pick !== null);
  if (!shown) {
    wrap.replaceChildren(el('p', { class: 'dim empty' }, budget.running ? 'Measuring every rate and export…'
      : 'Waiting for the render of these settings…'));
    $('budget-pick').textContent = '';
    drawBudgetPlot($('budget-plot'), null);
    if (!budget.running) $('budget-note').textContent = '';
    return;
  }
  const r = shown.result;
  const skipped = r.skipped.length ? `; ${r.skipped.length} left out (the sound cannot use them)` : '';
  $('budget-note').textContent = `${r.candidates.length} candidates measured in ${(r.ms / 1000).toFixed(2)} s${skipped}.`;
  const scroll = wrap.scrollTop;
  wrap.replaceChildren(budgetTable({ candidates: r.candidates, pareto: shown.pareto, pick: shown.pick,
    sort: budget.sort, onSort: (key) => {
      budget.sort = budget.sort.key === key ? { key, dir: -budget.sort.dir } : { key, dir: 1 };
      drawBudget();
      $(`budget-sort-${key}`)?.focus();
    } }));
  wrap.scrollTop = scroll;
  const p = ready && shown.pick !== null ? r.candidates[shown.pick] : null;
  const limit = shown.limit ?? budget.limit;
  $('budget-pick').textContent = !ready ? '' : p
    ? `Pick: ${p.rate_hz.toLocaleString('en')} Hz, ${p.export_label}, ${p.bytes.toLocaleString('en')} bytes`
    : limit.kind === 'none' ? '' : 'Nothing fits within the limit.';
  const limitBytes = limit.kind === 'max-bytes' ? limit.value
    : limit.kind === 'max-kbps' ? (limit.value * 1000 / 8) * r.duration_s : null;
  $('budget-plot-title').textContent = `${(shown.score ?? budget.score) === 'sqnr_db' ? 'SQNR' : 'A-weighted SNR'} ` +
    'against bytes';
  drawBudgetPlot($('budget-plot'), { candidates: r.candidates, pareto: shown.pareto, pick: shown.pick,
    score: shown.score ?? budget.score, limitBytes });
}
