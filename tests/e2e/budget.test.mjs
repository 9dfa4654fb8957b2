// The format budget panel, end to end on the committed page from file://: on the drum-hit demo the page's "best
// within 8192 bytes" is the CLI's `stairstep budget --max-bytes 8192` pick (same candidates, same sizes), applying it
// makes the page's preset exactly the CLI's `--save-preset`, and the page's download is byte for byte what
// `stairstep render` writes with that preset, `pick.bytes` long; the step is undoable. A chain change while the
// candidates are being measured cancels the measurement, and no table of other settings is ever shown.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { execFileSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { launch, openPage, afterRender, screenshot, root } from './browser.mjs';

const release = join(root, 'target', 'release', 'stairstep');
const cli = process.env.STAIRSTEP_BIN ?? (existsSync(release) ? release : join(root, 'target', 'debug', 'stairstep'));
const tmp = mkdtempSync(join(tmpdir(), 'stairstep-budget-'));
const sha256 = (buf) => createHash('sha256').update(buf).digest('hex');

let browser;
before(async () => { browser = await launch(); });
after(async () => { await browser?.close(); });

const budgetState = (page) => page.evaluate(() => {
  const b = window.stairstepBudget;
  return { shown: b.shown && { key: b.shown.key, pick: b.shown.pick, pareto: b.shown.pareto, limit: b.shown.limit,
    candidates: b.shown.result.candidates, ms: b.shown.result.ms, skipped: b.shown.result.skipped },
  running: b.running && { ...b.running }, runs: b.runs, cancels: b.cancels, currentKey: b.currentKey() };
});

// Waits until the panel shows the front and the pick for the current settings (and `limit`, when given).
async function waitForPick(page, limit = null) {
  await page.waitForFunction((l) => {
    const b = window.stairstepBudget;
    return b.shown && b.shown.pareto && b.shown.key === b.currentKey() &&
      (!l || JSON.stringify(b.shown.limit) === JSON.stringify(l));
  }, limit, { timeout: 120_000 });
}

// A hold-mode chain: the rate stage of every candidate keeps the mode, so the page and the CLI give the same bytes
// (the clean mode's filter is designed with the platform's sin/cos and may differ in a rare sample; see page.test).
const chain = { format: 'stairstep-preset', version: 1, name: 'drum budget', seed: 7, stages: [
  { kind: 'rate', rate_hz: 22050, mode: 'hold' }, { kind: 'quantize', bits: 10, dither: 'tpdf' }],
export: { type: 'wav', encoding: 'pcm-s16' } };

test('on the drum hit, the best within 8192 bytes is the CLI\'s pick, and applying it exports its exact bytes', async () => {
  const s = await openPage(browser);
  const { page } = s;
  const wav = join(tmp, 'drum.wav');
  execFileSync(cli, ['demo', 'drum-hit', '-o', wav, '--force']);
  await afterRender(page, () => page.setInputFiles('#file', wav));
  await afterRender(page, () => page.evaluate((p) => window.stairstepApplyPreset(p), chain));
  // The CLI gets the preset exactly as the page holds it (the core's normalised form).
  const presetPath = join(tmp, 'chain.json');
  writeFileSync(presetPath, JSON.stringify(await page.evaluate(() => window.stairstep.preset)));
  const pickPath = join(tmp, 'pick.json');
  const t0 = Date.now();
  const cliJson = JSON.parse(execFileSync(cli, ['budget', wav, '--preset', presetPath, '--max-bytes', '8192', '--json',
    '--save-preset', pickPath, '--force'], { encoding: 'utf8' }));
  const cliMs = Date.now() - t0;

  // Open the panel: the candidates are measured after the render is drawn.
  const opened = Date.now();
  await page.click('#budget-toggle');
  assert.equal(await page.getAttribute('#budget-toggle', 'aria-expanded'), 'true');
  await waitForPick(page);
  const tableMs = Date.now() - opened;
  let b = await budgetState(page);
  console.log(`drum hit: ${b.shown.candidates.length} candidates measured in the page's worker in ` +
    `${b.shown.ms.toFixed(0)} ms (${tableMs} ms from opening the panel to the table); the CLI's whole run ${cliMs} ms`);
  assert.deepEqual(b.shown.candidates.map((c) => c.id), cliJson.candidates.map((c) => c.id), 'the same candidates');
  assert.deepEqual(b.shown.candidates.map((c) => c.bytes), cliJson.candidates.map((c) => c.bytes), 'the same sizes');
  let worst = 0;
  b.shown.candidates.forEach((c, i) => {
    for (const k of ['sqnr_db', 'a_weighted_snr_db']) worst = Math.max(worst, Math.abs(c[k] - cliJson.candidates[i][k]));
  });
  console.log(`largest difference of SQNR or A-weighted SNR between page and CLI: ${worst.toExponential(2)} dB`);
  assert.ok(worst < 1e-3, `figures differ by ${worst} dB`);
  assert.equal(await page.locator('#budget-table tbody tr').count(), cliJson.candidates.length);
  await screenshot(page, 'budget-open');

  // "Best within 8192 bytes", typed.
  await page.selectOption('#budget-limit-kind', 'max-bytes');
  await page.fill('#budget-limit', '8192');
  await page.press('#budget-limit', 'Enter');
  await waitForPick(page, { kind: 'max-bytes', value: 8192 });
  b = await budgetState(page);
  assert.ok(cliJson.pick, 'the CLI found a pick');
  const pick = b.shown.candidates[b.shown.pick];
  assert.equal(pick.id, cliJson.pick.id, 'the page picks what the CLI picks');
  assert.ok(pick.bytes <= 8192);
  assert.deepEqual(b.shown.pareto, cliJson.candidates.map((c) => c.pareto), 'the same Pareto front');
  assert.equal(await page.getAttribute(`#budget-table tr[data-id="${pick.id}"]`, 'class'), 'pick pareto');
  assert.match(await page.textContent('#budget-pick'), new RegExp(`${pick.bytes.toLocaleString('en')} bytes`));
  await screenshot(page, 'budget-8192');

  // One click: the preset becomes the pick's, exactly the CLI's saved preset.
  const before = await page.evaluate(() => JSON.stringify(window.stairstep.preset));
  await afterRender(page, () => page.click('#budget-apply'));
  const applied = await page.evaluate(() => window.stairstep.preset);
  // (The page keeps an absent preparation as `prep: {}`, as it does for every preset it takes in.)
  assert.deepEqual(applied, { prep: {}, ...JSON.parse(readFileSync(pickPath, 'utf8')) },
    'the page\'s preset is the CLI\'s --save-preset');
  const [download] = await Promise.all([page.waitForEvent('download'), page.click('#download')]);
  const pagePath = join(tmp, 'page-pick.wav');
  await download.saveAs(pagePath);
  const cliPath = join(tmp, 'cli-pick.wav');
  execFileSync(cli, ['render', '--preset', pickPath, wav, '-o', cliPath, '--force', '--quiet']);
  const a = readFileSync(pagePath);
  const c = readFileSync(cliPath);
  assert.equal(a.length, cliJson.pick.bytes, 'the download is exactly pick.bytes long');
  assert.equal(sha256(a), sha256(c), 'the download is the CLI render\'s bytes');

  // Undoable through the history.
  await afterRender(page, () => page.evaluate(() => window.stairstepHistory.undo()));
  assert.equal(await page.evaluate(() => JSON.stringify(window.stairstep.preset)), before);
  assert.deepEqual(s.offline, [], 'no network request');
  assert.deepEqual(s.errors, []);
  await s.context.close();
});

test('a chain change while the candidates are measured cancels them; no table of other settings is shown', async () => {
  const s = await openPage(browser);
  const { page } = s;
  // The pad (4 s of stereo at 48 kHz) takes long enough to change the chain half-way.
  await afterRender(page, () => page.selectOption('#demo', 'pad'));
  await afterRender(page, () => page.evaluate((p) => window.stairstepApplyPreset(p), chain));
  // Watch every frame: a table on screen must always belong to the settings being edited.
  await page.evaluate(() => {
    window.staleFrames = 0;
    const watch = () => {
      const b = window.stairstepBudget;
      if (document.getElementById('budget-table') && b.shown?.key !== b.currentKey()) window.staleFrames++;
      requestAnimationFrame(watch);
    };
    requestAnimationFrame(watch);
  });
  await page.click('#budget-toggle');
  await page.waitForFunction(() => window.stairstepBudget.running?.done >= 2, null, { timeout: 60_000 });
  let b = await budgetState(page);
  assert.ok(b.running.done < b.running.total, 'still measuring');
  assert.equal(await page.isVisible('#budget-progress'), true, 'a progress bar while it runs');
  const firstKey = b.running.key;
  // Change the chain: 10 → 6 bits.
  const bits = page.locator('#f-1-bits');
  const before = await page.evaluate(() => +document.body.dataset.rendered);
  const t0 = Date.now();
  await bits.fill('6');
  await bits.press('Enter');
  await page.waitForFunction((n) => +document.body.dataset.rendered > n, before);
  const renderMs = Date.now() - t0;
  b = await budgetState(page);
  assert.equal(b.cancels, 1, 'the measurement under way was cancelled');
  assert.ok(!b.shown || b.shown.key === b.currentKey());
  await waitForPick(page);
  b = await budgetState(page);
  assert.equal(b.runs, 2);
  console.log(`pad (4 s stereo): ${b.shown.candidates.length} candidates in ${b.shown.ms.toFixed(0)} ms; the edit made ` +
    `during the first measurement was rendered and drawn ${renderMs} ms after Enter (the worker finishes the ` +
    'candidate under way first)');
  assert.equal(await page.evaluate((k) => window.stairstepBudget.cache.has(k), firstKey), false,
    'the cancelled measurement left no result');
  const current = b.shown.candidates.find((c) => c.current);
  assert.match(current.id, /^22050-hold-wav-pcm-s16$/);
  assert.ok(current.sqnr_db < 40, `the table is the 6-bit chain's: current SQNR ${current.sqnr_db} dB`);
  assert.equal(await page.evaluate(() => window.staleFrames), 0, 'no frame showed a table of other settings');
  assert.deepEqual(s.errors, []);
  await s.context.close();
});
