// What every canvas view shares: theme colours from the style sheet, and a canvas sized to its box in device pixels.

export function css(name) { return getComputedStyle(document.body).getPropertyValue(name).trim(); }

export function fitCanvas(c) {
  const r = c.getBoundingClientRect();
  const dpr = window.devicePixelRatio || 1;
  const w = Math.max(100, Math.round(r.width * dpr));
  const h = Math.max(60, Math.round(r.height * dpr));
  if (c.width !== w || c.height !== h) { c.width = w; c.height = h; }
  return { w, h, dpr };
}
