// The processing worker (the Rust core compiled to wasm, see www/worker.js): started from the page's inline sources,
// requests and their replies matched by id.
import { $, setStatus } from './util.js';

function decodeBase64(b64) {
  const bin = atob(b64.trim());
  const out = new Uint8Array(bin.length);
  for (let i = 0; i < bin.length; i++) out[i] = bin.charCodeAt(i);
  return out;
}

export const wasmBytes = decodeBase64($('wasm-b64').textContent);
export const wasmBytesLive = wasmBytes.slice(); // the worker takes the first copy; the live worklet gets this one
const workerUrl = URL.createObjectURL(new Blob([$('worker-src').textContent], { type: 'text/javascript' }));
const worker = new Worker(workerUrl); // classic: module workers from blob: URLs fail on file:// pages
const waiting = new Map();
// Messages the worker sends on its own, not as the reply to a request (e.g. a long job's progress), by type.
const listeners = {};
export function onWorkerMessage(type, fn) { listeners[type] = fn; }
let nextId = 1;

worker.onmessage = (e) => {
  const msg = e.data;
  const w = waiting.get(msg.id);
  if (!w) {
    if (msg.type === 'error') setStatus(msg.message, 'error');
    else listeners[msg.type]?.(msg);
    return;
  }
  waiting.delete(msg.id);
  if (msg.type === 'error') w.reject(new Error(msg.message)); else w.resolve(msg);
};
worker.onerror = (e) => setStatus(`Processing worker failed: ${e.message}`, 'error');

// Sends a request to the worker; resolves with its reply (every reply carries the request's id).
export function call(type, payload = {}, transfer = []) {
  const id = nextId++;
  return new Promise((resolve, reject) => {
    waiting.set(id, { resolve, reject });
    worker.postMessage({ type, id, ...payload }, transfer);
  });
}
