// The page fits the window and a keyboard drives it: the views, meters, chain and export (with Download) in view
// without scrolling at 1280×720 and 800×720, an accessibility check with axe-core, a keyboard-only session (open a
// sound and a preset, edit, play, stop, save, download), focus after stage edits, the loop typed in seconds, and
// refused values said in plain language with the views marked as showing the previous state.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, writeFileSync, mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { launch, openPage, afterRender, screenshot, root } from './browser.mjs';

const fixture = join(root, 'tests', 'fixtures', 's16-stereo-22050.wav');
const tmp = mkdtempSync(join(tmpdir(), 'stairstep-access-'));
// axe-core from node_modules (pinned in package-lock.json), evaluated in the page by the test driver: nothing is
// fetched, and the page's CSP is not loosened (evaluation through the DevTools protocol is not a page script).
const axeSource = readFileSync(join(root, 'node_modules', 'axe-core', 'axe.min.js'), 'utf8');

let browser;
before(async () => { browser = await launch(); });
after(async () => { await browser?.close(); });

// axe-core's violations of impact "serious" or "critical" (its own rule set: WCAG 2.x A/AA and best practices).
async function seriousViolations(page) {
  if (!(await page.evaluate(() => typeof window.axe === 'object'))) await page.evaluate(axeSource);
  const violations = await page.evaluate(async () => {
    const r = await window.axe.run(document, { resultTypes: ['violations'] });
    return r.violations.map((v) => ({ id: v.id, impact: v.impact, help: v.help,
      nodes: v.nodes.slice(0, 4).map((n) => n.target.join(' ')) }));
  });
  return violations.filter((v) => v.impact === 'serious' || v.impact === 'critical');
}

// Presses Tab (or Shift+Tab) until the focused element matches `selector`: proves it is reachable by keyboard.
async function tabTo(page, selector, { back = false, max = 120 } = {}) {
  for (let i = 0; i < max; i++) {
    if (await page.evaluate((s) => document.activeElement?.matches(s) ?? false, selector)) return i;
    await page.keyboard.press(back ? 'Shift+Tab' : 'Tab');
  }
  throw new Error(`${selector} not reached by ${back ? 'Shift+' : ''}Tab in ${max} presses`);
}

const focused = (page) => page.evaluate(() => document.activeElement?.id || document.activeElement?.tagName);

for (const [width, height] of [[1280, 720], [800, 720]]) {
  test(`at ${width}×${height} the views, meters, chain and export fit without scrolling`, async () => {
    const s = await openPage(browser, { viewport: { width, height } });
    const { page } = s;
    const layout = await page.evaluate(() => {
      const box = (id) => { const r = document.getElementById(id).getBoundingClientRect(); return { top: r.top, bottom: r.bottom, left: r.left, right: r.right }; };
      return {
        scroll: [document.documentElement.scrollWidth, document.documentElement.scrollHeight],
        view: [innerWidth, innerHeight],
        status: box('status'),
        boxes: Object.fromEntries(['download', 'export', 'chain', 'add-stage', 'preset-load', 'meters', 'wave', 'spectrum',
          'spectrogram', 'lower-view', 'play', 'open-file', 'monitor'].map((id) => [id, box(id)])),
      };
    });
    assert.ok(layout.scroll[0] <= width && layout.scroll[1] <= height, `page scrolls: ${layout.scroll}`);
    for (const [id, b] of Object.entries(layout.boxes)) {
      assert.ok(b.bottom - b.top > 10, `${id} has no height`);
      assert.ok(b.top >= 0 && b.left >= 0 && b.right <= width, `${id} outside the window: ${JSON.stringify(b)}`);
      assert.ok(b.bottom <= layout.status.top, `${id} under the status line: ${JSON.stringify(b)}, status ${layout.status.top}`);
    }
    // The waveform and the spectrum are big enough to read.
    assert.ok(layout.boxes.wave.bottom - layout.boxes.wave.top >= 90);
    assert.ok(layout.boxes.spectrum.bottom - layout.boxes.spectrum.top >= 90);
    await screenshot(page, `access-${width}x${height}`);
    assert.deepEqual(await seriousViolations(page), []);
    // The lower view's other choice, the SQNR sweep, takes the spectrogram's place.
    await page.selectOption('#lower-view', 'sweep');
    const sweep = await page.evaluate(() => { const r = document.getElementById('sweep').getBoundingClientRect(); return { top: r.top, bottom: r.bottom, right: r.right }; });
    assert.ok(sweep.bottom - sweep.top > 10 && sweep.right <= width && sweep.bottom <= layout.status.top, `sweep ${JSON.stringify(sweep)}`);
    assert.deepEqual(await seriousViolations(page), [], 'the sweep shown');
    await page.selectOption('#lower-view', 'spectrogram');
    // A stage tapped: its own figures in the meters.
    await afterRender(page, () => page.click('#tap-0'));
    assert.deepEqual(await seriousViolations(page), [], 'a stage tapped');
    assert.deepEqual(s.offline, []);
    assert.deepEqual(s.errors, []);
    await s.context.close();
  });
}

test('axe-core finds no serious or critical problem: dark theme, preparation tab, save dialog, a refusal', async () => {
  const s = await openPage(browser, { colorScheme: 'dark', viewport: { width: 1280, height: 720 } });
  const { page } = s;
  assert.deepEqual(await seriousViolations(page), [], 'dark');
  await page.click('#tab-prep');
  assert.deepEqual(await seriousViolations(page), [], 'preparation tab');
  await page.click('#tab-chain');
  await page.fill('#f-0-bits', '30');
  await page.press('#f-0-bits', 'Enter');
  await page.waitForSelector('#stale-note:not([hidden])');
  assert.deepEqual(await seriousViolations(page), [], 'refused value shown');
  await page.click('#preset-save');
  assert.deepEqual(await seriousViolations(page), [], 'save dialog');
  await page.keyboard.press('Escape');
  await s.context.close();
});

test('the formats by cost panel: reached and driven by keyboard, axe-core finds nothing serious, light and dark', async () => {
  for (const colorScheme of ['light', 'dark']) {
    const s = await openPage(browser, { colorScheme, viewport: { width: 1280, height: 720 } });
    const { page } = s;
    await tabTo(page, '#budget-toggle');
    await page.keyboard.press('Enter');
    assert.equal(await focused(page), 'budget-limit-kind', 'opening the panel puts the focus in it');
    await page.waitForFunction(() => window.stairstepBudget.shown?.pareto, null, { timeout: 120_000 });
    assert.deepEqual(await seriousViolations(page), [], `panel open (${colorScheme})`);
    // The limit by keyboard: unit, then value; the pick is named; the table scrolls from the keyboard.
    await page.keyboard.press('ArrowDown'); // no limit → bytes
    await page.keyboard.press('ArrowDown'); // → kbit/s
    await tabTo(page, '#budget-limit', { back: true });
    await page.keyboard.type('400');
    await page.keyboard.press('Enter');
    await page.waitForFunction(() => window.stairstepBudget.shown?.limit?.value === 400);
    assert.match(await page.textContent('#budget-pick'), /^Pick: .* bytes$/);
    await tabTo(page, '#budget-sort-aw');
    await page.keyboard.press('Enter');
    assert.equal(await page.evaluate(() => document.getElementById('budget-sort-aw').closest('th').ariaSort),
      'ascending', 'sorted by A-weighted SNR, and the focus stays on its header');
    assert.equal(await focused(page), 'budget-sort-aw');
    await tabTo(page, '#budget-table-wrap');
    await tabTo(page, '#budget-apply');
    assert.equal(await page.isEnabled('#budget-apply'), true);
    assert.deepEqual(await seriousViolations(page), [], `pick shown (${colorScheme})`);
    await tabTo(page, '#budget-close');
    await page.keyboard.press('Enter');
    assert.equal(await focused(page), 'budget-toggle', 'closing gives the focus back to the button that opened it');
    assert.equal(await page.isVisible('#budget-panel'), false);
    await s.context.close();
  }
});

test('keyboard only: open a sound and a preset, edit a stage, play and stop, save a preset, download', async () => {
  const s = await openPage(browser, { viewport: { width: 1280, height: 720 } });
  const { page } = s;
  // Intercept file choosers from the start (Playwright turns interception on when the first listener is added;
  // adding it only just before the key press can lose the race and let the native chooser open unseen).
  page.on('filechooser', () => {});
  await page.evaluate(() => 0);
  const presetPath = join(tmp, 'keys.json');
  writeFileSync(presetPath, JSON.stringify({ format: 'stairstep-preset', version: 1, name: 'keys', seed: 2, stages: [
    { kind: 'gain', gain_db: 0 }, { kind: 'quantize', bits: 8 }],
  export: { type: 'wav', encoding: 'pcm-u8' } }));

  // A sound, through the file chooser that "Open file…" opens.
  await tabTo(page, '#open-file');
  await afterRender(page, async () => {
    const [chooser] = await Promise.all([page.waitForEvent('filechooser'), page.keyboard.press('Enter')]);
    await chooser.setFiles(fixture);
  });
  assert.equal(await page.evaluate(() => window.stairstep.info.sampleRate), 22050);

  // A preset, through "Load preset…".
  await tabTo(page, '#preset-load');
  await afterRender(page, async () => {
    const [chooser] = await Promise.all([page.waitForEvent('filechooser'), page.keyboard.press('Enter')]);
    await chooser.setFiles(presetPath);
  });
  assert.equal(await page.evaluate(() => window.stairstep.preset.name), 'keys');
  assert.equal(await page.locator('.stage').count(), 2);

  // Edit the quantizer's bits: 8 → 4, typed.
  const before = await page.evaluate(() => window.stairstep.report.sqnr_db);
  await tabTo(page, '#f-1-bits', { back: true });
  await afterRender(page, async () => {
    await page.keyboard.press('Control+A');
    await page.keyboard.type('4');
    await page.keyboard.press('Enter');
  });
  assert.equal(await page.evaluate(() => window.stairstep.preset.stages[1].bits), 4);
  // 4 bits fewer: about 24 dB less SQNR (6.02 dB per bit, the textbook rule for a uniform quantizer).
  const after4 = await page.evaluate(() => window.stairstep.report.sqnr_db);
  assert.ok(before - after4 > 15, `SQNR ${before} → ${after4} dB`);

  // Play and stop with the Play button.
  await tabTo(page, '#play', { back: true });
  await page.keyboard.press('Enter');
  await page.waitForFunction(() => window.stairstepAudio?.playing === true);
  await page.keyboard.press('Enter');
  await page.waitForFunction(() => window.stairstepAudio.playing === false);
  // Space on a button presses it (the play shortcut leaves controls alone): on "Play" it plays.
  await page.keyboard.press('Space');
  await page.waitForFunction(() => window.stairstepAudio.playing === true);
  await page.keyboard.press('Space');
  await page.waitForFunction(() => window.stairstepAudio.playing === false);

  // Save the preset: the dialog asks for a name, Enter saves, the file is named after it.
  await tabTo(page, '#preset-save');
  await page.keyboard.press('Enter');
  assert.equal(await focused(page), 'save-name');
  await page.keyboard.press('Control+A');
  await page.keyboard.type('Crunchy keys');
  const [saved] = await Promise.all([page.waitForEvent('download'), page.keyboard.press('Enter')]);
  assert.equal(saved.suggestedFilename(), 'crunchy-keys.json');
  const savedPath = join(tmp, 'saved-keys.json');
  await saved.saveAs(savedPath);
  assert.equal(JSON.parse(readFileSync(savedPath, 'utf8')).name, 'Crunchy keys');
  assert.equal(await focused(page), 'preset-save', 'focus back on the button after saving');

  // Download the export.
  await tabTo(page, '#download');
  const [download] = await Promise.all([page.waitForEvent('download'), page.keyboard.press('Enter')]);
  assert.equal(download.suggestedFilename(), 's16-stereo-22050--crunchy-keys.wav');
  const out = join(tmp, 'keys.wav');
  await download.saveAs(out);
  assert.equal(readFileSync(out).length, await page.evaluate(() => window.stairstep.report.export_bytes));
  await screenshot(page, 'access-keyboard');
  assert.deepEqual(s.offline, []);
  assert.deepEqual(s.errors, []);
  await s.context.close();
});

test('after moving, removing or bypassing a stage the focus stays in the chain; a new stage comes into view', async () => {
  const s = await openPage(browser, { viewport: { width: 1280, height: 720 } });
  const { page } = s;
  await afterRender(page, () => page.evaluate((p) => window.stairstepApplyPreset(p), {
    format: 'stairstep-preset', version: 1, name: 'focus', stages: [
      { kind: 'gain', gain_db: -3 }, { kind: 'quantize', bits: 8 }, { kind: 'g711', law: 'mulaw' }] }));
  const kinds = () => page.evaluate(() => window.stairstep.preset.stages.map((x) => x.kind));
  await page.focus('#down-0');
  await afterRender(page, () => page.keyboard.press('Enter'));
  assert.deepEqual(await kinds(), ['quantize', 'gain', 'g711']);
  assert.equal(await focused(page), 'down-1', 'the moved stage keeps the focus on its button');
  await afterRender(page, () => page.keyboard.press('Enter'));
  assert.deepEqual(await kinds(), ['quantize', 'g711', 'gain']);
  assert.equal(await focused(page), 'up-2', 'at the bottom: its other move button');
  await page.focus('#b-1');
  await afterRender(page, () => page.keyboard.press('Space'));
  assert.equal(await page.evaluate(() => window.stairstep.preset.stages[1].bypass), true);
  assert.equal(await focused(page), 'b-1');
  await page.focus('#stage-1 button[aria-label^=Remove]');
  await afterRender(page, () => page.keyboard.press('Enter'));
  assert.deepEqual(await kinds(), ['quantize', 'gain']);
  assert.equal(await focused(page), 'stage-1', 'the stage that took its place');
  // Add five stages: the last one is scrolled into the chain's view.
  for (let i = 0; i < 5; i++) {
    await page.selectOption('#add-kind', 'quantize');
    await afterRender(page, () => page.click('#add-stage'));
  }
  const inView = await page.evaluate(() => {
    const list = document.getElementById('chain').getBoundingClientRect();
    const cards = document.querySelectorAll('.stage');
    const last = cards[cards.length - 1].getBoundingClientRect();
    return { list: [list.top, list.bottom], last: [last.top, last.bottom], n: cards.length };
  });
  assert.equal(inView.n, 7);
  // The whole card when it fits in the chain's panel, else its top (scrollIntoView with block 'nearest').
  const fits = inView.last[1] - inView.last[0] <= inView.list[1] - inView.list[0];
  assert.ok(inView.last[0] >= inView.list[0] - 1 && (!fits || inView.last[1] <= inView.list[1] + 1)
    && inView.last[0] < inView.list[1], JSON.stringify(inView));
  assert.deepEqual(s.errors, []);
  await s.context.close();
});

test('a refused value is said in plain language on its stage, and the views say they show the previous state', async () => {
  const s = await openPage(browser, { viewport: { width: 1280, height: 720 } });
  const { page } = s;
  await afterRender(page, () => page.evaluate((p) => window.stairstepApplyPreset(p), {
    format: 'stairstep-preset', version: 1, name: 'refuse', stages: [
      { kind: 'gain', gain_db: 0 }, { kind: 'quantize', bits: 8 }] }));
  const good = await page.evaluate(() => window.stairstep.report.sqnr_db);
  await page.fill('#f-1-bits', '30');
  await page.press('#f-1-bits', 'Enter');
  await page.waitForFunction(() => document.getElementById('status').dataset.kind === 'error');
  const status = await page.textContent('#status');
  // The core's message is "parameter `stages[1].bits` is 30, allowed: 1..=24" (stages from 0); the page numbers
  // stages from 1 and names them as its cards do.
  assert.equal(status, 'Stage 2, Uniform quantizer: Bits cannot be 30. Allowed: 1 to 24 bit.');
  assert.doesNotMatch(status, /stages\[|`|\.\.=/);
  assert.equal(await page.textContent('#stage-1-error'), status);
  assert.equal(await page.getAttribute('#f-1-bits', 'aria-invalid'), 'true');
  assert.ok(await page.isVisible('#stale-note'));
  assert.match(await page.textContent('#stale-note'), /last accepted settings/);
  assert.ok(await page.evaluate(() => document.getElementById('views').classList.contains('stale')));
  assert.equal(await page.evaluate(() => window.stairstep.report.sqnr_db), good, 'the report is the previous one');
  await screenshot(page, 'access-refused');
  // A good value clears all of it.
  await afterRender(page, async () => { await page.fill('#f-1-bits', '6'); await page.press('#f-1-bits', 'Enter'); });
  assert.equal(await page.isVisible('#stale-note'), false);
  assert.equal(await page.textContent('#stage-1-error'), '');
  assert.equal(await page.getAttribute('#f-1-bits', 'aria-invalid'), null);
  // A refused preset file is said the same way.
  await page.evaluate((p) => window.stairstepApplyPreset(p), { format: 'stairstep-preset', version: 1, name: 'bad',
    stages: [{ kind: 'minifloat', exponent_bits: 12, mantissa_bits: 3 }] });
  await page.waitForFunction(() => /Preset not loaded/.test(document.getElementById('status').textContent));
  assert.match(await page.textContent('#status'), /^Preset not loaded: Stage 1, Minifloat: Exponent cannot be 12\. Allowed: 1 to 8 bit\.$/);
  assert.deepEqual(s.errors, []);
  await s.context.close();
});

test('the loop is typed in seconds; "Use selection" without one says what to do', async () => {
  const s = await openPage(browser, { viewport: { width: 1280, height: 720 } });
  const { page } = s;
  const rate = await page.evaluate(() => window.stairstep.info.sampleRate);
  await page.click('#tab-prep');
  await page.click('#prep-loop-set');
  assert.match(await page.textContent('#prep-loop-note'), /No region selected yet/);
  assert.equal(await page.evaluate(() => document.getElementById('status').dataset.kind), 'error');
  await page.fill('#loop-start', '0.5');
  await page.press('#loop-start', 'Tab');
  await page.fill('#loop-end', '1.25');
  await page.press('#loop-end', 'Enter');
  assert.deepEqual(await page.evaluate(() => window.stairstep.loop), { start: Math.round(0.5 * rate), end: Math.round(1.25 * rate) });
  // An impossible loop is refused and the previous one stays.
  await page.fill('#loop-end', '0.1');
  await page.press('#loop-end', 'Enter');
  assert.match(await page.textContent('#status'), /start must come before the end/);
  assert.equal(await page.getAttribute('#loop-end', 'aria-invalid'), 'true');
  assert.deepEqual(await page.evaluate(() => window.stairstep.loop), { start: Math.round(0.5 * rate), end: Math.round(1.25 * rate) });
  await page.fill('#loop-end', '1.25');
  await page.press('#loop-end', 'Enter');
  await afterRender(page, () => page.click('#prep-loop-set'));
  assert.deepEqual(await page.evaluate(() => window.stairstep.preset.prep.loop_region),
    { start: Math.round(0.5 * rate), end: Math.round(1.25 * rate), crossfade_ms: 0 });
  assert.equal(await page.textContent('#prep-loop-note'), '');
  await screenshot(page, 'access-preparation');
  // Clear: the whole sound again, and the fields empty.
  await page.click('#loop-clear');
  assert.equal(await page.evaluate(() => window.stairstep.loop), null);
  assert.equal(await page.inputValue('#loop-start'), '');
  assert.deepEqual(s.errors, []);
  await s.context.close();
});
