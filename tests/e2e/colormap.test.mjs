// The spectrogram's colour map ("Kiln", www/js/views/colormap.js): ordered by lightness, so that it reads in order in
// grey and without colour vision. No browser needed: the module is pure.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { KILN, KILN_RGBA, lightness } from '../../www/js/views/colormap.js';

test('Kiln has 256 8-bit sRGB entries whose CIELAB lightness L* rises strictly from first to last', () => {
  assert.equal(KILN.length, 256);
  for (const rgb of KILN) for (const v of rgb) assert.ok(Number.isInteger(v) && v >= 0 && v <= 255, String(rgb));
  const L = KILN.map(lightness);
  for (let i = 1; i < L.length; i++) assert.ok(L[i] > L[i - 1], `L* falls at ${i}: ${L[i - 1]} → ${L[i]}`);
  // A wide range (dark to light) and no step much larger than the average (even in lightness).
  assert.ok(L[0] < 8 && L[255] > 92, `L* ${L[0]} … ${L[255]}`);
  const mean = (L[255] - L[0]) / 255;
  const steps = L.slice(1).map((v, i) => v - L[i]);
  assert.ok(Math.max(...steps) < 3 * mean, `largest L* step ${Math.max(...steps)} against a mean of ${mean}`);
});

test('Kiln in grey (Rec. 709 luma of the encoded values) is monotonic too', () => {
  const luma = KILN.map(([r, g, b]) => 0.2126 * r + 0.7152 * g + 0.0722 * b);
  for (let i = 1; i < luma.length; i++) assert.ok(luma[i] >= luma[i - 1], `luma falls at ${i}`);
});

test('the packed table matches the entries (RGBA bytes, opaque)', () => {
  const bytes = new Uint8Array(KILN_RGBA.buffer);
  for (let i = 0; i < 256; i += 17) {
    assert.deepEqual([...bytes.subarray(4 * i, 4 * i + 4)], [...KILN[i], 255]);
  }
});
