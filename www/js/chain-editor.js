// The chain editor: one card per stage (its fields, bypass, move, remove), the "Add stage" tools, and the place where
// a refused value is shown.
import { $, el, setStatus } from './util.js';
import { STAGES, MIX_FIELD, mixApplies } from './schema.js';
import { state } from './state.js';
import { requestRender } from './session.js';
import { fieldControl } from './fields.js';
import { plainError } from './messages.js';
import { stageFigures } from './views/meters.js';

// Redraws the stage cards. `focus` says which control gets the focus afterwards (a redraw replaces them all):
// { index, control: 'up' | 'down' | 'bypass' | 'card' }, or a field id for fields (see fields.js).
export function renderChain(focus = null) {
  const box = $('chain');
  box.replaceChildren();
  const n = state.preset.stages.length;
  if (state.tap !== null && state.tap >= n) state.tap = null;
  state.preset.stages.forEach((stage, i) => {
    const schema = STAGES[stage.kind];
    const label = schema ? schema.label : stage.kind;
    // Enum and checkbox changes can show or hide other fields, so they redraw the stage; typing and dragging do not
    // (redrawing would take the focus away).
    const changed = (structural) => { if (structural) renderChain(); requestRender(); };
    const head = el('div', { class: 'stage-head' },
      el('span', { class: 'stage-index', 'aria-hidden': 'true' }, String(i + 1)),
      el('strong', { id: `stage-${i}-title` }, label),
      el('label', { class: 'check' }, el('input', { type: 'checkbox', id: `b-${i}`, checked: !!stage.bypass,
        onchange: (e) => {
          stage.bypass = e.target.checked;
          if (!stage.bypass) delete stage.bypass;
          renderChain({ index: i, control: 'bypass' });
          requestRender();
        } }), 'Bypass'),
      el('button', { type: 'button', id: `tap-${i}`, class: 'tap', 'aria-pressed': String(state.tap === i),
        title: 'Tap: see and hear the signal after this stage, and the error this stage alone adds',
        'aria-label': `Tap after stage ${i + 1}`, onclick: () => setTap(state.tap === i ? null : i) }, 'Tap'),
      el('button', { type: 'button', id: `up-${i}`, title: 'Move up', 'aria-label': `Move stage ${i + 1} up`,
        disabled: i === 0, onclick: () => moveStage(i, -1) }, '↑'),
      el('button', { type: 'button', id: `down-${i}`, title: 'Move down', 'aria-label': `Move stage ${i + 1} down`,
        disabled: i === n - 1, onclick: () => moveStage(i, 1) }, '↓'),
      el('button', { type: 'button', id: `rm-${i}`, title: 'Remove', 'aria-label': `Remove stage ${i + 1}`,
        onclick: () => removeStage(i) }, '✕'));
    // Every stage but the rate stage has a Mix (its output blended with its own input).
    const fields = schema ? schema.fields.filter((f) => !f.when || f.when(stage)) : [];
    if (mixApplies(stage)) fields.push(MIX_FIELD);
    const body = el('div', { class: 'stage-body' },
      ...fields.map((f) => fieldControl(stage, f, changed, `f-${i}-${f.key}`)));
    box.append(el('div', { class: `stage${stage.bypass ? ' bypassed' : ''}${state.tap === i ? ' tapped' : ''}`,
      'data-kind': stage.kind, id: `stage-${i}`, role: 'group', 'aria-label': `Stage ${i + 1}, ${label}`, tabindex: -1 },
    head, body, el('p', { class: 'stage-figures dim', id: `stage-${i}-figures` }),
    el('p', { class: 'stage-error', id: `stage-${i}-error` })));
  });
  if (focus) focusAfterRedraw(focus);
  renderChainMix();
  showStageFigures();
}

// Taps the chain after stage i (null: the whole chain): the views, the meters and the audition follow.
export function setTap(i) {
  state.tap = i;
  state.preset.stages.forEach((_, k) => {
    $(`tap-${k}`)?.setAttribute('aria-pressed', String(k === i));
    $(`stage-${k}`)?.classList.toggle('tapped', k === i);
  });
  setStatus(i === null ? 'Showing the whole chain.' : `Showing and playing the signal after stage ${i + 1} ` +
    `(${STAGES[state.preset.stages[i].kind]?.label ?? state.preset.stages[i].kind}) and the error it alone adds.`);
  requestRender();
}

// Each stage's own figures from the latest render (the report's `stages`), in one line under its fields.
export function showStageFigures() {
  const r = state.report;
  if (!r || !r.stages || state.renderedPreset !== JSON.stringify(state.preset)) return;
  r.stages.forEach((st, i) => {
    const p = $(`stage-${i}-figures`);
    if (p) p.textContent = stageFigures(st);
  });
}

// The chain's Mix (the preset's `mix`): the whole chain's output blended with its input.
export function renderChainMix() {
  $('chain-mix').replaceChildren(fieldControl(state.preset, { ...MIX_FIELD, label: 'Chain mix' }, () => requestRender(),
    'chain-mix-value'));
}

function focusAfterRedraw({ index, control }) {
  const n = state.preset.stages.length;
  if (n === 0) { $('add-kind').focus(); return; }
  const i = Math.max(0, Math.min(n - 1, index));
  let target = control === 'up' ? $(`up-${i}`) : control === 'down' ? $(`down-${i}`)
    : control === 'bypass' ? $(`b-${i}`) : $(`stage-${i}`);
  // A stage moved to the top or the bottom: its other move button.
  if (target?.disabled) target = $(control === 'up' ? `down-${i}` : `up-${i}`);
  if (target?.disabled) target = $(`stage-${i}`);
  target?.focus();
  $(`stage-${i}`)?.scrollIntoView({ block: 'nearest' });
}

function moveStage(i, d) {
  const s = state.preset.stages;
  [s[i], s[i + d]] = [s[i + d], s[i]];
  if (state.tap === i) state.tap = i + d; else if (state.tap === i + d) state.tap = i;
  renderChain({ index: i + d, control: d < 0 ? 'up' : 'down' });
  requestRender();
}

function removeStage(i) {
  const [gone] = state.preset.stages.splice(i, 1);
  if (state.tap === i) state.tap = null; else if (state.tap !== null && state.tap > i) state.tap -= 1;
  renderChain({ index: i, control: 'card' });
  setStatus(`Removed stage ${i + 1} (${STAGES[gone.kind]?.label ?? gone.kind}).`);
  requestRender();
}

// Shows a refusal from the core on the stage (and the field) it names, in plain language; clears it with null.
// Returns the text for the status line.
export function markStageErrors(message) {
  document.querySelectorAll('.stage-error').forEach((e) => { e.textContent = ''; });
  document.querySelectorAll('#chain [aria-invalid]').forEach((e) => {
    e.removeAttribute('aria-invalid');
    e.removeAttribute('aria-describedby');
  });
  if (!message) return null;
  const { text, index, key } = plainError(message, state.preset);
  const card = index === null ? null : $(`stage-${index}`);
  if (card) {
    $(`stage-${index}-error`).textContent = text;
    const field = key ? $(`f-${index}-${key}`) : null;
    if (field) {
      field.setAttribute('aria-invalid', 'true');
      field.setAttribute('aria-describedby', `stage-${index}-error`);
    }
  }
  return text;
}

// The add-stage menu lists the kinds of the core's schema (filled once the engine has started).
export function fillAddMenu() {
  const add = $('add-kind');
  add.replaceChildren(...Object.entries(STAGES).map(([k, s]) => el('option', { value: k }, s.label)));
}

export function setupStageTools() {
  const add = $('add-kind');
  fillAddMenu();
  $('add-stage').onclick = () => {
    const kind = add.value;
    const stage = { kind };
    for (const f of STAGES[kind].fields) if (f.def !== null && f.def !== undefined) stage[f.key] = f.def;
    state.preset.stages.push(stage);
    renderChain();
    // The new stage comes into view; the focus stays on "Add stage" (to add more).
    $(`stage-${state.preset.stages.length - 1}`).scrollIntoView({ block: 'nearest' });
    setStatus(`Added stage ${state.preset.stages.length} (${STAGES[kind].label}).`);
    requestRender();
  };
}
