// "Kiln", the spectrogram's colour map: 256 colours from quiet (dark indigo) to loud (pale straw), through violet,
// crimson and amber, designed here for Stairstep. It is ordered and perceptually even because it is built in OKLab
// (Björn Ottosson's perceptual colour space): lightness L rises linearly from the first entry to the last, the hue
// turns steadily, and the chroma swells in the middle and fades at both ends. A colour outside the sRGB gamut keeps
// its lightness and hue and gives up chroma (found by bisection), so the lightness ramp survives gamut mapping and the
// map still reads in order printed in grey or seen without colour vision. Pure functions, no DOM: the tests import it.

const L0 = 0.16; // OKLab lightness of the quietest colour
const L1 = 0.96; // and of the loudest
const H0 = 268; // hue (degrees, OKLab's a/b plane) at the quiet end: indigo
const H1 = 100; // at the loud end, going up through violet, crimson, amber: straw (268 → 360 → 460 = 100)
const C_MAX = 0.165; // chroma at the middle of the ramp, before gamut mapping

// OKLab → linear sRGB (Ottosson's matrices).
function oklabToLinear(L, a, b) {
  const l = (L + 0.3963377774 * a + 0.2158037573 * b) ** 3;
  const m = (L - 0.1055613458 * a - 0.0638541728 * b) ** 3;
  const s = (L - 0.0894841775 * a - 1.291485548 * b) ** 3;
  return [
    4.0767416621 * l - 3.3077115913 * m + 0.2309699292 * s,
    -1.2684380046 * l + 2.6097574011 * m - 0.3413193965 * s,
    -0.0041960863 * l - 0.7034186147 * m + 1.707614701 * s,
  ];
}

const encode = (v) => (v <= 0.0031308 ? 12.92 * v : 1.055 * v ** (1 / 2.4) - 0.055);
const decode = (v) => (v <= 0.04045 ? v / 12.92 : ((v + 0.055) / 1.055) ** 2.4);

// The colour at t ∈ [0, 1], as linear sRGB, inside the gamut.
function kilnLinear(t) {
  const L = L0 + (L1 - L0) * t;
  const h = ((H0 + (H1 + 360 - H0) * t) * Math.PI) / 180;
  // Chroma: a smooth swell, zero at neither end (a touch of hue keeps the ends from reading as plain black and white).
  let c = C_MAX * (0.12 + 0.88 * Math.sin(Math.PI * t) ** 0.9);
  const at = (chroma) => oklabToLinear(L, chroma * Math.cos(h), chroma * Math.sin(h));
  const inside = (rgb) => rgb.every((v) => v >= -1e-9 && v <= 1 + 1e-9);
  if (!inside(at(c))) {
    let lo = 0;
    let hi = c;
    for (let i = 0; i < 40; i++) { const mid = (lo + hi) / 2; if (inside(at(mid))) lo = mid; else hi = mid; }
    c = lo;
  }
  return at(c).map((v) => Math.min(1, Math.max(0, v)));
}

// CIELAB L* (D65) of an 8-bit sRGB colour: the lightness the tests check.
export function lightness([r, g, b]) {
  const y = 0.2126 * decode(r / 255) + 0.7152 * decode(g / 255) + 0.0722 * decode(b / 255);
  return y > 216 / 24389 ? 116 * Math.cbrt(y) - 16 : (24389 / 27) * y;
}

// The table: 256 [r, g, b] entries, 8-bit sRGB. Rounding to 8 bits can leave two neighbours whose lightness does
// not rise (a step of L* ≈ 0.3 against a rounding error of the same size in the darks); such an entry is nudged one
// code at a time, green first (it carries most of the luminance), until its lightness is above its predecessor's.
function buildTable(n = 256) {
  const table = [];
  let prev = -Infinity;
  for (let i = 0; i < n; i++) {
    const rgb = kilnLinear(i / (n - 1)).map((v) => Math.round(encode(v) * 255));
    for (let k = 0; lightness(rgb) <= prev && k < 12; k++) {
      const ch = [1, 0, 2][k % 3];
      rgb[ch] = Math.min(255, rgb[ch] + 1);
    }
    prev = lightness(rgb);
    table.push(rgb);
  }
  return table;
}

export const KILN = buildTable();
export const KILN_NAME = 'Kiln';

// The table as packed RGBA words for an ImageData's Uint32Array view (little-endian: 0xAABBGGRR).
export const KILN_RGBA = Uint32Array.from(KILN, ([r, g, b]) => ((255 << 24) | (b << 16) | (g << 8) | r) >>> 0);

// CSS colour of entry i (0…255).
export function kilnCss(i) {
  const [r, g, b] = KILN[Math.max(0, Math.min(255, Math.round(i)))];
  return `rgb(${r}, ${g}, ${b})`;
}
