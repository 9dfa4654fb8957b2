// The core's refusals in plain language, naming the place as the page shows it. The core says, for example,
//   parameter `stages[1].bits` is 30, allowed: 1..=24
// (stages counted from 0); the page says "Stage 2, Uniform quantizer: Bits cannot be 30. Allowed: 1 to 24 bit."
import { STAGES, EXPORT_TYPES, MIX_FIELD } from './schema.js';

const PREP_LABELS = {
  channels: 'Channels', trim: 'Trim silence', threshold_dbfs: 'Trim threshold', margin_ms: 'Trim margin',
  fade_in: 'Fade in', fade_out: 'Fade out', ms: 'length', normalize: 'Normalise', target_dbfs: 'Peak target',
  target_lufs: 'Loudness target', loop_region: 'Loop', crossfade_ms: 'Loop crossfade',
};

// "1..=24" → "1 to 24"; "8k + 1 for k ≥ 1, 9 to 65529" stays as it is.
function plainRange(allowed, unit) {
  const m = /^(-?[\d.]+)\.\.=(-?[\d.]+)(.*)$/.exec(allowed.trim());
  const text = m ? `${m[1]} to ${m[2]}${m[3]}` : allowed.trim();
  return unit && /^-?[\d.]+ to -?[\d.]+$/.test(text) ? `${text} ${unit}` : text;
}

// Where the parameter is: { index (from 0) or null, place: what the page calls it, field: the field's label, unit }.
export function locate(path, preset) {
  const stage = /^stages\[(\d+)\]\.?(.*)$/.exec(path);
  if (stage) {
    const index = +stage[1];
    const kind = preset?.stages?.[index]?.kind;
    const schema = STAGES[kind];
    const f = stage[2] === 'mix' ? MIX_FIELD : schema?.fields.find((x) => x.key === stage[2]);
    return { index, key: stage[2], place: `Stage ${index + 1}${schema ? `, ${schema.label}` : ''}`,
      field: f ? f.label : stage[2].replace(/_/g, ' '), unit: f?.unit, scale: f?.scale };
  }
  const exp = /^export\.?(.*)$/.exec(path);
  if (exp) {
    const f = EXPORT_TYPES[preset?.export?.type]?.fields.find((x) => x.key === exp[1]);
    return { index: null, place: 'Export', field: f ? f.label : exp[1].replace(/_/g, ' '), unit: f?.unit };
  }
  const prep = /^prep\.?(.*)$/.exec(path);
  if (prep) {
    const keys = prep[1].split('.');
    const field = keys.map((k) => PREP_LABELS[k] ?? k.replace(/_/g, ' ')).join(' ');
    return { index: null, place: 'Preparation', field };
  }
  if (path === 'mix') return { index: null, place: 'Chain', field: 'Mix', unit: MIX_FIELD.unit, scale: MIX_FIELD.scale };
  return { index: null, place: null, field: path.replace(/_/g, ' ') };
}

// { text, index }: the message for people, and the stage it is about (from 0), if any.
export function plainError(message, preset) {
  const m = /parameter `([^`]+)` is (.*?), allowed: (.*)$/s.exec(message);
  if (!m) return { text: message.replace(/^bad preset: /, 'The preset is not valid: '), index: null };
  const where = locate(m[1], preset);
  const field = where.field ? where.field.charAt(0).toUpperCase() + where.field.slice(1) : 'This value';
  const place = where.place ? `${where.place}: ` : '';
  // A mix is 0..1 in the preset and in the core's words, in per cent on the page.
  const scaled = (v) => (where.scale && /^-?[\d.]+$/.test(v.trim()) ? String(Math.round(+v * where.scale * 1e6) / 1e6) : v);
  const allowed = where.scale ? m[3].replace(/^(-?[\d.]+)(\.\.=| to )(-?[\d.]+)/, (_, a, to, b) => `${scaled(a)}${to}${scaled(b)}`)
    : m[3];
  const value = where.scale ? `${scaled(m[2])} ${where.unit}` : m[2];
  const text = `${place}${field} cannot be ${value}. Allowed: ${plainRange(allowed, where.unit)}.`;
  return { text, index: where.index, key: where.key };
}
