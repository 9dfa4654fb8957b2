// The chain editor's newer controls, end to end on the committed page: the filter stage, a Mix per stage and for the
// chain (saved in presets, rendered to the CLI's bytes), undo / redo of every kind of edit, and A/B snapshots with
// optional loudness matching (checked against pyloudnorm).
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { launch, openPage, afterRender, screenshot, root } from './browser.mjs';

const fixture = join(root, 'tests', 'fixtures', 's16-stereo-22050.wav');
const cli = process.env.STAIRSTEP_BIN ?? join(root, 'target', 'debug', 'stairstep');
const python = join(root, '.venv', 'bin', 'python');
const tmp = mkdtempSync(join(tmpdir(), 'stairstep-edit-'));

let browser;
let s; // { page, offline, errors }
before(async () => {
  browser = await launch();
  s = await openPage(browser);
});
after(async () => { await browser?.close(); });

const preset = () => s.page.evaluate(() => structuredClone(window.stairstep.preset));

async function setField(id, value) {
  const input = s.page.locator(`#${id}`);
  await afterRender(s.page, async () => { await input.fill(String(value)); await input.press('Enter'); });
}

async function usePreset(p) {
  await afterRender(s.page, () => s.page.evaluate((x) => window.stairstepApplyPreset(x), p));
}

// The page's Download of the current preset, saved to `name` in the temporary folder; returns its bytes.
async function download(name) {
  const [d] = await Promise.all([s.page.waitForEvent('download'), s.page.click('#download')]);
  const path = join(tmp, name);
  await d.saveAs(path);
  return readFileSync(path);
}

// The preset as "Save preset…" writes it (the dialog, then the downloaded file).
async function savePreset(name) {
  await s.page.click('#preset-save');
  await s.page.fill('#save-name', name);
  const [d] = await Promise.all([s.page.waitForEvent('download'), s.page.click('#save-confirm')]);
  const path = join(tmp, `${name}.json`);
  await d.saveAs(path);
  return path;
}

function cliRender(presetPath, input, name) {
  const out = join(tmp, name);
  execFileSync(cli, ['render', '--preset', presetPath, input, '-o', out, '--force', '--quiet']);
  return readFileSync(out);
}

test('filter stage: added from the menu with the core\'s defaults, its gain shown only for shelves and peaks', async () => {
  const { page } = s;
  await afterRender(page, () => page.setInputFiles('#file', fixture));
  await usePreset({ format: 'stairstep-preset', version: 1, name: 'filter', stages: [] });
  await page.selectOption('#add-kind', 'filter');
  await afterRender(page, () => page.click('#add-stage'));
  const st = (await preset()).stages[0];
  // The defaults of `stairstep stages filter` (the core's schema).
  assert.deepEqual(st, { kind: 'filter', shape: 'lowpass', freq_hz: 4000, q: 0.7071067811865476, gain_db: 0, sections: 1 });
  assert.equal(await page.locator('#f-0-gain_db').count(), 0, 'no gain on a low-pass');
  assert.equal(await page.getAttribute('#f-0-freq_hz', 'max'), '384000');
  await afterRender(page, () => page.selectOption('#f-0-shape', 'peaking'));
  assert.equal(await page.locator('#f-0-gain_db').count(), 1, 'a peak has a gain');
  assert.equal(await page.evaluate(() => document.activeElement.id), 'f-0-shape', 'focus stays on the shape');
  await setField('f-0-gain_db', -12);
  await setField('f-0-freq_hz', 1000);
  assert.equal(await page.evaluate(() => document.body.dataset.rendered > 0 && document.getElementById('status').dataset.kind), 'info');
});

test('a Mix on every stage but the rate stage, and one for the chain: the page\'s render equals the CLI\'s, byte for byte', async () => {
  const { page } = s;
  await afterRender(page, () => page.setInputFiles('#file', fixture));
  await usePreset({ format: 'stairstep-preset', version: 1, name: 'blend', seed: 5, stages: [
    { kind: 'rate', rate_hz: 11025, mode: 'hold' }, { kind: 'quantize', bits: 4, dither: 'tpdf' },
    { kind: 'filter', shape: 'lowpass', freq_hz: 3000 }], export: { type: 'wav', encoding: 'pcm-s16' } });
  assert.equal(await page.locator('#f-0-mix').count(), 0, 'no Mix on the rate stage');
  assert.equal(await page.inputValue('#f-1-mix'), '100');
  assert.equal(await page.inputValue('#chain-mix-value'), '100');
  const full = await download('full.wav');

  // Mix 50 % on the quantizer, typed in per cent; the preset holds 0.5.
  await setField('f-1-mix', 50);
  let p = await preset();
  assert.equal(p.stages[1].mix, 0.5);
  assert.equal(p.mix, undefined, 'a full chain mix is left out, as the core writes it');
  const half = await download('half.wav');
  assert.ok(!half.equals(full), 'the mix changes the output');
  let saved = await savePreset('blend-half');
  assert.equal(JSON.parse(readFileSync(saved, 'utf8')).stages[1].mix, 0.5, 'the saved preset carries the stage mix');
  let cliOut = cliRender(saved, fixture, 'cli-half.wav');
  assert.ok(half.equals(cliOut), `stage mix 0.5: page ${half.length} bytes, CLI ${cliOut.length} bytes differ`);

  // And the chain's Mix at 70 % on top.
  await setField('chain-mix-value', 70);
  p = await preset();
  assert.equal(p.mix, 0.7);
  const both = await download('both.wav');
  assert.ok(!both.equals(half));
  saved = await savePreset('blend-both');
  const savedJson = JSON.parse(readFileSync(saved, 'utf8'));
  assert.equal(savedJson.mix, 0.7, 'the saved preset carries the chain mix');
  cliOut = cliRender(saved, fixture, 'cli-both.wav');
  assert.ok(both.equals(cliOut), `chain mix 0.7: page ${both.length} bytes, CLI ${cliOut.length} bytes differ`);
  await screenshot(page, 'edit-mix-filter');

  // Back to 100 %: the key leaves the preset again.
  await setField('f-1-mix', 100);
  assert.equal((await preset()).stages[1].mix, undefined);
});

test('a mix out of range is refused in per cent, on the stage that has it', async () => {
  const { page } = s;
  await usePreset({ format: 'stairstep-preset', version: 1, name: 'bad mix', stages: [{ kind: 'quantize', bits: 8 }] });
  await page.fill('#f-0-mix', '150');
  await page.press('#f-0-mix', 'Enter');
  await page.waitForSelector('#stale-note:not([hidden])');
  assert.equal(await page.textContent('#stage-0-error'), 'Stage 1, Uniform quantizer: Mix cannot be 150 %. Allowed: 0 to 100 %.');
  assert.equal(await page.getAttribute('#f-0-mix', 'aria-invalid'), 'true');
  await setField('f-0-mix', 80);
  assert.equal(await page.isHidden('#stale-note'), true);
});

// Waits for the render an action triggers, then returns the preset and what the chain editor shows.
async function view() {
  return s.page.evaluate(() => ({
    preset: structuredClone(window.stairstep.preset),
    cards: [...document.querySelectorAll('#chain .stage')].map((c) => ({ kind: c.dataset.kind,
      bypassed: c.classList.contains('bypassed'),
      values: [...c.querySelectorAll('.stage-body input[type=number], .stage-body select')].map((x) => x.value) })),
    trim: document.getElementById('prep-trim-on')?.checked ?? null,
    threshold: document.getElementById('prep-trim-threshold')?.value ?? null,
  }));
}

test('undo brings back every step of a sequence of edits, redo replays them, the focus returns to the edited control', async () => {
  const { page } = s;
  await afterRender(page, () => page.selectOption('#demo', 'pad'));
  await usePreset({ format: 'stairstep-preset', version: 1, name: 'undo', stages: [
    { kind: 'gain', gain_db: 0 }, { kind: 'quantize', bits: 8 }] });
  const steps = [await view()];
  const depth = () => page.evaluate(() => window.stairstepHistory.depth[0]);
  const depth0 = await depth();
  const controls = [];
  const edit = async (control, action) => {
    await afterRender(page, action);
    steps.push(await view());
    controls.push(control);
  };
  await edit('f-1-bits', async () => { await page.fill('#f-1-bits', '5'); await page.press('#f-1-bits', 'Enter'); });
  await page.selectOption('#add-kind', 'filter');
  await edit('add-stage', () => page.click('#add-stage'));
  await edit('up-2', () => page.click('#up-2'));
  await edit('b-0', () => page.click('#b-0'));
  await page.click('#tab-prep');
  await edit('prep-trim-on', () => page.click('#prep-trim-on'));
  await edit('prep-trim-threshold', async () => {
    await page.fill('#prep-trim-threshold', '-50');
    await page.press('#prep-trim-threshold', 'Enter');
  });
  const p = steps.at(-1).preset;
  assert.equal(p.stages[0].bypass, true);
  assert.deepEqual(p.stages.map((x) => x.kind), ['gain', 'filter', 'quantize']);
  assert.equal(p.stages[2].bits, 5);
  assert.deepEqual(p.prep.trim, { threshold_dbfs: -50, margin_ms: 10 });
  // Every step differs from the one before (so that each undo is seen).
  for (let k = 1; k < steps.length; k++) assert.notDeepEqual(steps[k], steps[k - 1], `step ${k}`);

  // Ctrl+Z, from wherever the focus is, back to the start: each step's preset and editor, the focus on the control
  // that made the undone edit (the Preparation tab is shown again for a preparation edit, the Chain tab for a chain
  // edit).
  await page.click('#tab-chain');
  for (let k = steps.length - 1; k > 0; k--) {
    await afterRender(page, () => page.keyboard.press('Control+z'));
    const v = await view();
    assert.deepEqual(v.preset, steps[k - 1].preset, `undo to step ${k - 1}`);
    assert.deepEqual(v.cards, steps[k - 1].cards, `editor at step ${k - 1}`);
    assert.equal(await page.evaluate(() => document.activeElement.id), controls[k - 1], `focus after undoing step ${k}`);
  }
  assert.equal(await depth(), depth0, 'one undo step per edit');
  const rendered = await page.evaluate(() => window.stairstep.report.clipped_per_stage.length);
  assert.equal(rendered, 2, 'the views show the first step\'s chain');
  // Redo: Ctrl+Shift+Z and Ctrl+Y in turn, forward to the end.
  for (let k = 1; k < steps.length; k++) {
    await afterRender(page, () => page.keyboard.press(k % 2 ? 'Control+Shift+Z' : 'Control+y'));
    const v = await view();
    assert.deepEqual(v.preset, steps[k].preset, `redo to step ${k}`);
    if (v.trim !== null && steps[k].trim !== null) assert.equal(v.threshold, steps[k].threshold);
  }
  // The buttons do the same, and keep the focus.
  await afterRender(page, () => page.click('#undo'));
  assert.deepEqual((await view()).preset, steps.at(-2).preset);
  assert.equal(await page.evaluate(() => document.activeElement.id), 'undo');
  await afterRender(page, () => page.click('#redo'));
  assert.deepEqual((await view()).preset, steps.at(-1).preset);
  // A new edit after an undo drops the redo steps.
  await afterRender(page, () => page.click('#undo'));
  await page.click('#tab-chain');
  await afterRender(page, async () => { await page.fill('#f-2-bits', '3'); await page.press('#f-2-bits', 'Enter'); });
  assert.equal(await page.isDisabled('#redo'), true);
  await screenshot(page, 'edit-undo');
});

// pyloudnorm (ITU-R BS.1770-4 integrated loudness, through the pinned Python references) of each file, in LUFS.
function pyloudnorm(...paths) {
  const out = execFileSync(python, ['-c', `
import sys, soundfile as sf, pyloudnorm as pyln
for p in sys.argv[1:]:
    data, rate = sf.read(p)
    print(pyln.Meter(rate).integrated_loudness(data))
`, ...paths], { encoding: 'utf8' });
  return out.trim().split('\n').map(Number);
}

test('snapshots A–D hold whole presets; loudness matching evens out the monitor gains by the loudness difference', async () => {
  const { page } = s;
  await afterRender(page, () => page.selectOption('#demo', 'pad'));
  const a = { format: 'stairstep-preset', version: 1, name: 'snap A', seed: 1, stages: [{ kind: 'quantize', bits: 8 }],
    export: { type: 'wav', encoding: 'float32' } };
  const b = { format: 'stairstep-preset', version: 1, name: 'snap B', seed: 1, stages: [{ kind: 'gain', gain_db: -9 },
    { kind: 'quantize', bits: 5 }, { kind: 'filter', shape: 'lowpass', freq_hz: 2000 }],
  export: { type: 'wav', encoding: 'float32' } };
  await usePreset(a);
  const canonical = async () => (await preset());
  const presetA = await canonical();
  // Key B (focus outside the text boxes): B starts as a copy of A; then B gets its own preset.
  await page.evaluate(() => document.activeElement.blur());
  await page.keyboard.press('b');
  assert.equal(await page.getAttribute('#snap-b', 'aria-pressed'), 'true');
  assert.deepEqual(await preset(), presetA);
  await usePreset(b);
  const presetB = await preset();
  // Flip with the keys and the buttons: the whole preset comes back each time, and the editor shows it.
  await afterRender(page, () => page.keyboard.press('a'));
  assert.deepEqual(await preset(), presetA);
  assert.equal(await page.locator('.stage').count(), 1);
  await afterRender(page, () => page.click('#snap-b'));
  assert.deepEqual(await preset(), presetB);
  assert.equal(await page.locator('.stage').count(), 3);
  // Each snapshot has its own undo: B's preset load is undone back to its copy of A, and redone.
  await afterRender(page, () => page.click('#undo'));
  assert.deepEqual(await preset(), presetA);
  await afterRender(page, () => page.click('#redo'));
  assert.deepEqual(await preset(), presetB);

  // Loudness matching on, playing the processed sound.
  await afterRender(page, () => page.check('#match-loudness'));
  await page.click('#play');
  await page.waitForFunction(() => window.stairstepAudio?.playing && window.stairstepAudio.ctx.state === 'running');
  const measure = async (name) => {
    await page.waitForTimeout(400); // the gain glides there with a 20 ms time constant
    const g = await page.evaluate(() => ({ applied: window.stairstepAudio.appliedDb,
      node: 20 * Math.log10(window.stairstepAudio.monitor.gain.value), loudness: window.stairstep.loudness }));
    const file = await download(`${name}.wav`);
    assert.ok(file.length > 1000);
    return g;
  };
  const gB = await measure('snap-b');
  await afterRender(page, () => page.click('#snap-a'));
  const gA = await measure('snap-a');
  await page.click('#play');
  const [la, lb] = pyloudnorm(join(tmp, 'snap-a.wav'), join(tmp, 'snap-b.wav'));
  console.log(`loudness: A ${la.toFixed(2)} LUFS, B ${lb.toFixed(2)} LUFS (pyloudnorm); page A ${gA.loudness.output.toFixed(2)}, ` +
    `B ${gB.loudness.output.toFixed(2)}; monitor gains A ${gA.applied.toFixed(2)} dB, B ${gB.applied.toFixed(2)} dB`);
  assert.ok(la - lb > 3, 'B is quieter than A (the check would be empty otherwise)');
  // The gains actually applied by the monitor node follow the computed ones.
  assert.ok(Math.abs(gA.node - gA.applied) < 0.05 && Math.abs(gB.node - gB.applied) < 0.05, JSON.stringify({ gA, gB }));
  // The quieter snapshot is played louder by exactly the loudness difference: pyloudnorm's (BS.1770-4) reading of
  // the two renders exported from the page, within 0.1 LU.
  assert.ok(Math.abs((gB.applied - gA.applied) - (la - lb)) < 0.1,
    `gain difference ${(gB.applied - gA.applied).toFixed(3)} dB, loudness difference ${(la - lb).toFixed(3)} LU`);
  await screenshot(page, 'edit-snapshots');
  // Off: the monitor is the Monitor control alone again.
  await page.uncheck('#match-loudness');
  assert.equal(await page.evaluate(() => window.stairstepAudio.appliedDb), -30);
});

test('no page error during the editing session', () => {
  assert.deepEqual(s.offline, []);
  assert.deepEqual(s.errors, []);
});
