// Shared set-up for the end-to-end tests: Debian's Chromium driven by playwright-core, the committed offline page
// opened from file://, and a record of every request the page makes.
import { chromium } from 'playwright-core';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { dirname, join } from 'node:path';
import { mkdirSync } from 'node:fs';

export const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..');
export const pageUrl = pathToFileURL(join(root, 'dist', 'stairstep.html')).href;
export const shotsDir = join(root, 'build', 'screenshots');

export async function launch() {
  return chromium.launch({
    executablePath: process.env.CHROMIUM ?? '/usr/bin/chromium',
    args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking',
      '--disable-component-update', '--disable-sync', '--disable-dev-shm-usage',
      '--autoplay-policy=no-user-gesture-required', '--use-fake-device-for-media-stream', '--use-fake-ui-for-media-stream'],
  });
}

// Opens the page (1280×800 unless `viewport` says otherwise); returns { page, requests, errors }. `requests` lists
// every URL the page asked for, `offline` the ones that were not file:, data: or blob: (must stay empty).
export async function openPage(browser, { colorScheme = 'light', viewport = { width: 1280, height: 800 } } = {}) {
  const context = await browser.newContext({ viewport, colorScheme, acceptDownloads: true });
  const page = await context.newPage();
  const requests = [];
  const offline = [];
  const errors = [];
  page.on('request', (r) => {
    requests.push(r.url());
    if (!/^(file|data|blob):/.test(r.url())) offline.push(r.url());
  });
  // Workers' requests too.
  context.on('request', (r) => { if (!/^(file|data|blob):/.test(r.url())) offline.push(r.url()); });
  page.on('pageerror', (e) => errors.push(String(e)));
  page.on('console', (m) => { if (m.type() === 'error') errors.push(m.text()); });
  await page.goto(pageUrl);
  await page.waitForSelector('body[data-ready=true]', { timeout: 60_000 });
  await waitRendered(page, 1);
  return { page, context, requests, offline, errors };
}

// Waits until the page has finished at least `n` renders in total.
export async function waitRendered(page, n) {
  await page.waitForFunction((k) => +(document.body.dataset.rendered || 0) >= k, n, { timeout: 60_000 });
}

export async function renders(page) {
  return page.evaluate(() => +(document.body.dataset.rendered || 0));
}

// Runs `action` and waits for the render it triggers.
export async function afterRender(page, action) {
  const before = await renders(page);
  await action();
  await waitRendered(page, before + 1);
  // A burst of changes is coalesced; wait until the renders settle.
  await page.waitForTimeout(150);
  let now = await renders(page);
  for (;;) {
    await page.waitForTimeout(100);
    const later = await renders(page);
    if (later === now) break;
    now = later;
  }
}

export async function screenshot(page, name) {
  mkdirSync(shotsDir, { recursive: true });
  const path = join(shotsDir, `${name}.png`);
  await page.screenshot({ path, fullPage: true });
  return path;
}
