// Stage schema: what the chain editor shows for each stage kind (from the core), and the export formats. The core has
// the last word on every value (its error messages name the field and range).

const E = (options) => ({ type: 'enum', options });
// Filled from the core's own schema (Session.stageSchema, the same data `stairstep stages --json` prints) when the
// engine starts: each kind's label and fields with unit, allowed range, step, slider range, default, placeholder and
// the field that decides whether another one applies. The ranges are the constants the core validates with.
export const STAGES = {};

// One field of the core's schema in the shape the page's controls use.
function fromCore(f, fields) {
  const out = { key: f.key, label: f.label, type: f.type, unit: f.unit ?? '', def: f.default ?? null };
  if (f.type === 'enum') out.options = f.options;
  if (f.min !== undefined) Object.assign(out, { min: f.min, max: f.max, step: f.step });
  if (f.slider) out.range = f.slider;
  if (f.placeholder) out.placeholder = f.placeholder;
  if (f.when) {
    const other = fields.find((g) => g.key === f.when.field);
    const fallback = other ? other.default : undefined;
    out.when = (s) => f.when.is.includes(String(s[f.when.field] ?? fallback));
  }
  return out;
}

// Replaces the stage table by the core's schema (a JSON array of kinds).
export function useCoreSchema(kinds) {
  for (const k of Object.keys(STAGES)) delete STAGES[k];
  for (const k of kinds) STAGES[k.kind] = { label: k.label, fields: k.fields.map((f) => fromCore(f, k.fields)) };
}

// Blend, a field of every stage but the rate stage (`mix`, 0..1 in the preset, shown in per cent; 1, the default,
// is left out of the preset as the core writes it) and of the chain (the preset's `mix`).
export const MIX_FIELD = { key: 'mix', label: 'Mix', type: 'float', min: 0, max: 100, step: 1, unit: '%', def: 1,
  scale: 100, omitDefault: true };
export const mixApplies = (stage) => stage.kind !== 'rate';

// Export formats: the `type` picks one of these, its fields are edited like a stage's.
export const EXPORT_TYPES = {
  wav: {
    label: 'WAV',
    fields: [
      { key: 'encoding', label: 'Encoding',
        ...E(['pcm-u8', 'pcm-s16', 'pcm-s24', 'pcm-s32', 'float32', 'mulaw', 'alaw', 'ima-adpcm', 'ms-adpcm', 'g721',
          'gsm610']),
        def: 'pcm-s16' },
      { key: 'block_align', label: 'Block align', type: 'int', min: 8, max: 65532, step: 4, unit: 'B', def: null,
        placeholder: '256 × ch', when: (s) => s.encoding === 'ima-adpcm' || s.encoding === 'ms-adpcm' },
    ],
  },
  aiff: {
    label: 'AIFF',
    fields: [{ key: 'encoding', label: 'Encoding', ...E(['pcm-s8', 'pcm-s16', 'pcm-s24', 'float32']), def: 'pcm-s16' }],
  },
  vox: { label: 'VOX (Dialogic ADPCM, mono)', fields: [] },
  'delta-bits': {
    label: '1-bit delta stream',
    fields: [
      { key: 'step', label: 'Step', type: 'float', min: 0.0001, max: 0.5, step: 0.001, unit: '', def: 0.02 },
      { key: 'leak', label: 'Leak', type: 'float', min: 0.5, max: 1, step: 0.001, unit: '', def: 1 },
      { key: 'bit_order', label: 'Bit order', ...E(['msb-first', 'lsb-first']), def: 'msb-first' },
    ],
  },
  raw: {
    label: 'Raw samples (no header)',
    fields: [
      { key: 'bits', label: 'Bits', ...E([1, 2, 4, 8, 16]), numeric: true, def: 8 },
      { key: 'signed', label: 'Signed', type: 'bool', def: true },
      { key: 'endian', label: 'Byte order', ...E(['little', 'big']), def: 'little', when: (s) => +s.bits === 16 },
      { key: 'bit_order', label: 'Bit order', ...E(['msb-first', 'lsb-first']), def: 'msb-first',
        when: (s) => +s.bits < 8 },
    ],
  },
  'c-array': {
    label: 'C array',
    fields: [
      { key: 'element', label: 'Element', ...E(['int8', 'uint8', 'int16']), def: 'int8' },
      { key: 'name', label: 'Name', type: 'text', def: 'sound' },
    ],
  },
};

// The preparation panel's choices (the preset's `prep`).
export const CHANNEL_MODES = {
  keep: 'keep', 'mono, sum −3 dB': { mono: 'sum-3db' }, 'mono, sum −6 dB': { mono: 'sum-6db' },
  'mono, average': { mono: 'average' }, 'left only': { mono: 'left' }, 'right only': { mono: 'right' },
  'mono → stereo': 'duplicate',
};
export const CURVES = ['linear', 'equal-power', 'exponential'];
