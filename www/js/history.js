// Undo / redo of every edit of the preset (chain, preparation, export, presets loaded), and snapshots A–D of the
// whole preset to flip between while listening.
//
// Every edit ends in a render request; just before it (`record`, wired by main.js) the preset is compared with the
// one last recorded, and if it differs the previous one goes on the undo stack with the id of the control that made
// the change, so that undo and redo put the focus back on it. A slider dragged (many changes in a row from one
// control) makes one step.
import { $, setStatus } from './util.js';
import { state } from './state.js';
import { requestRender } from './session.js';
import { renderChain } from './chain-editor.js';
import { renderPrep } from './prep-panel.js';
import { renderExport } from './export.js';

const LIMIT = 500; // steps kept
const DRAG_MERGE_MS = 1000; // a slider's changes closer than this make one step
// Each snapshot has its own history; `undoStack` and `redoStack` are the active one's.
// Entries: { json, control }: the preset before an edit, and the control that made the edit.
const histories = [0, 1, 2, 3].map(() => ({ undo: [], redo: [] }));
let undoStack = histories[0].undo;
let redoStack = histories[0].redo;
let current = null; // the preset as last recorded (JSON)
let lastControl = null; // the control the user used last (its id), until a record takes it
let dragging = false; // that use was a slider's drag
let lastStep = { control: null, at: 0, drag: false };

// The id of the control an event came from: its own id, or the id its label points to (a slider beside a number
// box belongs to the box), or the id of the button it is in.
function controlId(target) {
  const t = target.closest?.('button, input, select, textarea') ?? target;
  if (t.id) return t.id;
  return t.closest?.('label[for]')?.getAttribute('for') ?? null;
}

function noteControl(ev) {
  if (ev.target.closest?.('#history, #snapshots, dialog')) return;
  const id = controlId(ev.target);
  if (!id) return;
  lastControl = id;
  dragging = ev.type === 'input' && ev.target.type === 'range';
}

// Called before every render request.
export function record() {
  const json = JSON.stringify(state.preset);
  const control = lastControl;
  const drag = dragging;
  lastControl = null;
  dragging = false;
  if (current === null || json === current) { current = json; return; }
  const now = performance.now();
  const merge = drag && lastStep.drag && control === lastStep.control && now - lastStep.at < DRAG_MERGE_MS &&
    undoStack.length > 0 && redoStack.length === 0;
  if (!merge) {
    undoStack.push({ json: current, control });
    if (undoStack.length > LIMIT) undoStack.shift();
  }
  lastStep = { control, at: now, drag };
  redoStack.length = 0;
  current = json;
  updateButtons();
}

// Puts a preset in place without making a step of it, redraws the panels and renders.
function restore(json) {
  current = json;
  lastControl = null;
  state.preset = JSON.parse(json);
  state.preset.prep ??= {};
  renderPrep();
  renderChain();
  renderExport();
  requestRender();
}

// The control an edit was made with, focused again (on its tab, if the other tab is shown). A removed stage's
// "remove" button is not pressed again by accident: its card gets the focus instead.
function refocus(control) {
  if (!control) return;
  const rm = /^rm-(\d+)$/.exec(control);
  const target = $(rm ? `stage-${rm[1]}` : control);
  if (!target) return;
  const panel = target.closest('[role=tabpanel]');
  if (panel?.hidden) document.querySelector(`[role=tab][aria-controls=${panel.id}]`)?.click();
  target.focus();
}

function step(from, to, verb, focus) {
  const e = from.pop();
  if (!e) { setStatus(`Nothing to ${verb}.`); return false; }
  to.push({ json: current, control: e.control });
  lastStep = { control: null, at: 0, drag: false };
  restore(e.json);
  if (focus) refocus(e.control);
  updateButtons();
  setStatus(`${verb === 'undo' ? 'Undone' : 'Redone'} (${undoStack.length} to undo, ${redoStack.length} to redo).`);
  return true;
}
export const undo = (focus = true) => step(undoStack, redoStack, 'undo', focus);
export const redo = (focus = true) => step(redoStack, undoStack, 'redo', focus);

function updateButtons() {
  const had = document.activeElement?.id;
  $('undo').disabled = undoStack.length === 0;
  $('redo').disabled = redoStack.length === 0;
  // A button that just ran out keeps no focus: hand it to the other one.
  if ((had === 'undo' || had === 'redo') && $(had).disabled) $(had === 'undo' ? 'redo' : 'undo').focus();
}

// ---- Snapshots: slots A–D, each a whole preset. The active slot is the one being edited; pressing another keeps
// the current preset in the active slot and brings the other's back (an empty slot starts as a copy).
export const SNAPSHOTS = ['A', 'B', 'C', 'D'];
const slots = SNAPSHOTS.map(() => null);
let active = 0;

// Flipping is not an edit: each snapshot keeps its own undo history, and the flip itself is not a step of it.
export function selectSnapshot(i) {
  if (i === active) return;
  slots[active] = JSON.stringify(state.preset);
  active = i;
  undoStack = histories[i].undo;
  redoStack = histories[i].redo;
  lastStep = { control: null, at: 0, drag: false };
  if (slots[i] === null) {
    slots[i] = JSON.stringify(state.preset);
    current = slots[i];
    lastControl = null;
    setStatus(`Snapshot ${SNAPSHOTS[i]}: a copy of the current settings. Edit it, then flip back to compare.`);
  } else {
    restore(slots[i]);
    setStatus(`Snapshot ${SNAPSHOTS[i]}.`);
  }
  updateButtons();
  updateSnapshots();
}

function updateSnapshots() {
  SNAPSHOTS.forEach((name, i) => {
    const b = $(`snap-${name.toLowerCase()}`);
    b.setAttribute('aria-pressed', String(i === active));
    b.classList.toggle('empty', slots[i] === null && i !== active);
    b.title = i === active ? `Snapshot ${name}: the settings being edited`
      : slots[i] === null ? `Snapshot ${name}: empty; press to start it as a copy of the current settings (key ${name})`
        : `Snapshot ${name}: ${JSON.parse(slots[i]).name ?? ''} (key ${name})`;
  });
}

// Keys: Ctrl+Z undo, Ctrl+Shift+Z or Ctrl+Y redo (⌘ too), except in a text box (its own undo); A–D pick a snapshot
// outside the controls that take letters (text and number boxes, menus).
function onKey(ev) {
  if (ev.target.closest('dialog')) return;
  const ctrl = ev.ctrlKey || ev.metaKey;
  const key = ev.key.toLowerCase();
  const textBox = ev.target.matches('textarea, input[type=text], input:not([type])');
  if (ctrl && !ev.altKey && (key === 'z' || key === 'y')) {
    if (textBox) return;
    ev.preventDefault();
    if (key === 'y' || ev.shiftKey) redo(); else undo();
    return;
  }
  if (ctrl || ev.altKey || ev.shiftKey || ev.target.matches('input:not([type=checkbox]):not([type=radio]), select, textarea')) return;
  const i = SNAPSHOTS.findIndex((n) => n.toLowerCase() === key);
  if (i >= 0) { ev.preventDefault(); selectSnapshot(i); }
}

export function setupHistory() {
  for (const type of ['change', 'input', 'click']) document.addEventListener(type, noteControl, true);
  document.addEventListener('keydown', onKey);
  $('undo').onclick = () => undo(false);
  $('redo').onclick = () => redo(false);
  SNAPSHOTS.forEach((name, i) => { $(`snap-${name.toLowerCase()}`).onclick = () => selectSnapshot(i); });
  updateButtons();
  updateSnapshots();
}

window.stairstepHistory = { undo, redo, selectSnapshot, get depth() { return [undoStack.length, redoStack.length]; },
  get active() { return active; } };
