// Stage schema: what the chain editor shows for each stage kind, and the export formats. Ranges mirror the core's
// validation; the core has the last word (its error messages name the field and range).

const E = (options) => ({ type: 'enum', options });
const LAWS = E(['mulaw', 'alaw']);
export const STAGES = {
  gain: {
    label: 'Gain and overflow',
    fields: [
      { key: 'gain_db', label: 'Gain', type: 'float', min: -60, max: 60, step: 0.1, unit: 'dB', def: 0 },
      { key: 'overflow', label: 'Beyond ±1', ...E(['clip', 'wrap', 'fold', 'saturate']), def: 'clip' },
    ],
  },
  rate: {
    label: 'Sample-rate reduction',
    fields: [
      { key: 'rate_hz', label: 'Rate', type: 'int', min: 1, max: 768000, step: 1, unit: 'Hz', def: 11025,
        range: [1000, 48000] },
      { key: 'mode', label: 'Mode', ...E(['hold', 'clean']), def: 'hold' },
    ],
  },
  quantize: {
    label: 'Uniform quantizer',
    fields: [
      { key: 'bits', label: 'Bits', type: 'int', min: 1, max: 24, unit: 'bit', def: 8 },
      { key: 'grid', label: 'Grid', ...E(['mid-tread', 'mid-rise']), def: 'mid-tread' },
      { key: 'rounding', label: 'Rounding', ...E(['nearest', 'truncate']), def: 'nearest' },
      { key: 'dither', label: 'Dither', ...E(['none', 'rpdf', 'tpdf', 'highpass-tpdf']), def: 'none' },
      { key: 'dither_peak_lsb', label: 'Dither peak', type: 'float', min: 0, max: 16, step: 0.05, unit: 'LSB',
        def: null, placeholder: 'standard' },
      { key: 'shaping', label: 'Noise shaping', ...E(['none', 'first-order', 'second-order', 'ewt5', 'ewt9']),
        def: 'none' },
    ],
  },
  g711: {
    label: 'G.711 (8-bit μ-law / A-law)',
    fields: [{ key: 'law', label: 'Law', ...LAWS, def: 'mulaw' }],
  },
  compand: {
    label: 'Companding curve',
    fields: [
      { key: 'law', label: 'Law', ...LAWS, def: 'mulaw' },
      { key: 'mu', label: 'μ', type: 'float', min: 1, max: 100000, step: 1, unit: '', def: 255,
        when: (s) => (s.law ?? 'mulaw') === 'mulaw' },
      { key: 'a', label: 'A', type: 'float', min: 1, max: 1000, step: 0.1, unit: '', def: 87.6,
        when: (s) => s.law === 'alaw' },
      { key: 'bits', label: 'Bits', type: 'int', min: 2, max: 24, unit: 'bit', def: 8 },
    ],
  },
  adpcm: {
    label: 'IMA ADPCM round trip (4-bit)',
    fields: [
      { key: 'samples_per_block', label: 'Block', type: 'int', min: 9, max: 65529, step: 8, unit: 'samples', def: 505,
        range: [9, 4089] },
    ],
  },
  minifloat: {
    label: 'Minifloat',
    fields: [
      { key: 'exponent_bits', label: 'Exponent', type: 'int', min: 1, max: 8, unit: 'bit', def: 4 },
      { key: 'mantissa_bits', label: 'Mantissa', type: 'int', min: 0, max: 23, unit: 'bit', def: 3 },
      { key: 'bias', label: 'Bias', type: 'int', min: 0, max: 255, unit: '', def: null, placeholder: 'IEEE' },
      { key: 'subnormals', label: 'Subnormals', type: 'bool', def: true },
    ],
  },
  filter: {
    label: 'Filter (biquad)',
    fields: [
      { key: 'shape', label: 'Shape', ...E(['lowpass', 'highpass', 'bandpass', 'lowshelf', 'highshelf', 'peaking']),
        def: 'lowpass' },
      { key: 'freq_hz', label: 'Frequency', type: 'float', min: 1, max: 384000, step: 1, unit: 'Hz', def: 4000,
        range: [20, 20000] },
      { key: 'q', label: 'Q', type: 'float', min: 0.1, max: 40, step: 0.01, unit: '', def: 0.7071067811865476,
        range: [0.1, 10] },
      { key: 'gain_db', label: 'Gain', type: 'float', min: -48, max: 48, step: 0.1, unit: 'dB', def: 0,
        when: (s) => ['lowshelf', 'highshelf', 'peaking'].includes(s.shape ?? 'lowpass') },
      { key: 'sections', label: 'Sections', type: 'int', min: 1, max: 8, step: 1, unit: '', def: 1 },
    ],
  },
};

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
        ...E(['pcm-u8', 'pcm-s16', 'pcm-s24', 'pcm-s32', 'float32', 'mulaw', 'alaw', 'ima-adpcm']), def: 'pcm-s16' },
      { key: 'block_align', label: 'Block align', type: 'int', min: 8, max: 65532, step: 4, unit: 'B', def: null,
        placeholder: '256 × ch', when: (s) => s.encoding === 'ima-adpcm' },
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
