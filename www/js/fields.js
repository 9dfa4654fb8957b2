// One form control per schema field (see schema.js), shared by the chain editor and the export panel: a select for
// an enum, a checkbox, a text box, or a number box with a slider beside it.
import { $, el } from './util.js';

export function fieldControl(stage, f, onChange, id) {
  const value = stage[f.key] ?? f.def;
  if (f.type === 'enum') {
    // An enum can show or hide other fields (see `when`), so the stage is redrawn, keeping the focus here.
    const sel = el('select', { id, onchange: () => {
      stage[f.key] = f.numeric ? +sel.value : sel.value;
      onChange(true);
      $(id)?.focus();
    } }, ...f.options.map((o) => el('option', { value: o, selected: String(o) === String(value) }, String(o))));
    return el('label', { class: 'field', for: id }, el('span', {}, f.label), sel);
  }
  if (f.type === 'text') {
    const box = el('input', { id, type: 'text', value: value ?? '', spellcheck: 'false',
      onchange: () => { stage[f.key] = box.value; onChange(); } });
    return el('label', { class: 'field', for: id }, el('span', {}, f.label), box);
  }
  if (f.type === 'bool') {
    const box = el('input', { id, type: 'checkbox', checked: !!value,
      onchange: () => { stage[f.key] = box.checked; onChange(true); $(id)?.focus(); } });
    return el('label', { class: 'field check', for: id }, box, el('span', {}, f.label));
  }
  const step = f.step ?? (f.type === 'int' ? 1 : 0.1);
  // `scale`: the control shows the stored value times this (a mix of 0.5 shows as 50 %).
  const scale = f.scale ?? 1;
  const shown = value === null || value === undefined ? '' : scale === 1 ? value : Math.round(value * scale * 1e6) / 1e6;
  const num = el('input', { id, type: 'number', min: f.min, max: f.max, step, value: shown,
    placeholder: f.placeholder ?? '', 'aria-label': f.unit ? `${f.label} in ${f.unit}` : f.label });
  const [rmin, rmax] = f.range ?? [f.min, f.max];
  const range = el('input', { type: 'range', min: rmin, max: rmax, step, value: shown === '' ? rmin : shown,
    tabindex: -1, 'aria-hidden': 'true' });
  const commit = (text) => {
    if (text === '' && f.def === null) { delete stage[f.key]; onChange(); return; }
    const v = f.type === 'int' ? parseInt(text, 10) : parseFloat(text);
    if (!Number.isFinite(v)) return;
    const stored = scale === 1 ? v : v / scale;
    // `omitDefault`: the default is left out of the preset, as the core writes it.
    if (f.omitDefault && stored === f.def) delete stage[f.key]; else stage[f.key] = stored;
    range.value = v;
    onChange();
  };
  num.addEventListener('change', () => commit(num.value));
  range.addEventListener('input', () => { num.value = range.value; commit(range.value); });
  return el('label', { class: 'field', for: id }, el('span', {}, f.label),
    el('span', { class: 'numeric' }, range, num, el('span', { class: 'unit' }, f.unit)));
}
