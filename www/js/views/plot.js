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

// A fresh plot: the canvas fitted to its box and filled with the plot background; its 2-D context and size.
export function startPlot(c) {
  const { w, h, dpr } = fitCanvas(c);
  const g = c.getContext('2d');
  g.fillStyle = css('--plot-bg');
  g.fillRect(0, 0, w, h);
  return { g, w, h, dpr };
}
