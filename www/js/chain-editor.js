// The chain editor: one card per stage (its fields, bypass, move, remove), the "Add stage" tools, and the place where
// a refused value is shown.
import { $, el } from './util.js';
import { STAGES } from './schema.js';
import { state } from './state.js';
import { requestRender } from './session.js';
import { fieldControl } from './fields.js';

export function renderChain() {
  const box = $('chain');
  box.replaceChildren();
  state.preset.stages.forEach((stage, i) => {
    const schema = STAGES[stage.kind];
    // Enum and checkbox changes can show or hide other fields, so they redraw the stage; typing and dragging do not
    // (redrawing would take the focus away).
    const changed = (structural) => { if (structural) renderChain(); requestRender(); };
    const head = el('div', { class: 'stage-head' },
      el('span', { class: 'stage-index' }, String(i + 1)),
      el('strong', {}, schema ? schema.label : stage.kind),
      el('label', { class: 'check' }, el('input', { type: 'checkbox', checked: !!stage.bypass,
        onchange: (e) => { stage.bypass = e.target.checked; if (!stage.bypass) delete stage.bypass; renderChain(); requestRender(); } }),
        'Bypass'),
      el('button', { type: 'button', title: 'Move up', 'aria-label': `Move stage ${i + 1} up`, disabled: i === 0,
        onclick: () => moveStage(i, -1) }, '↑'),
      el('button', { type: 'button', title: 'Move down', 'aria-label': `Move stage ${i + 1} down`,
        disabled: i === state.preset.stages.length - 1, onclick: () => moveStage(i, 1) }, '↓'),
      el('button', { type: 'button', title: 'Remove', 'aria-label': `Remove stage ${i + 1}`,
        onclick: () => { state.preset.stages.splice(i, 1); renderChain(); requestRender(); } }, '✕'));
    const body = el('div', { class: 'stage-body' },
      ...(schema ? schema.fields.filter((f) => !f.when || f.when(stage))
        .map((f) => fieldControl(stage, f, changed, `f-${i}-${f.key}`)) : []));
    box.append(el('div', { class: `stage${stage.bypass ? ' bypassed' : ''}`, 'data-kind': stage.kind }, head, body,
      el('div', { class: 'stage-error', role: 'alert' })));
  });
}

function moveStage(i, d) {
  const s = state.preset.stages;
  [s[i], s[i + d]] = [s[i + d], s[i]];
  renderChain();
  requestRender();
}

export function markStageErrors(message) {
  document.querySelectorAll('.stage-error').forEach((e) => { e.textContent = ''; });
  if (!message) return;
  const m = /stages\[(\d+)\]/.exec(message);
  const cards = document.querySelectorAll('.stage');
  if (m && cards[+m[1]]) cards[+m[1]].querySelector('.stage-error').textContent = message;
}

export function setupStageTools() {
  const add = $('add-kind');
  for (const [k, s] of Object.entries(STAGES)) add.append(el('option', { value: k }, s.label));
  $('add-stage').onclick = () => {
    const kind = add.value;
    const stage = { kind };
    for (const f of STAGES[kind].fields) if (f.def !== null && f.def !== undefined) stage[f.key] = f.def;
    state.preset.stages.push(stage);
    renderChain();
    requestRender();
  };
}
