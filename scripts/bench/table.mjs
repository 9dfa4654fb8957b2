#!/usr/bin/env node
// Prints the `make bench` table from BENCH_DIR/machine.txt and BENCH_DIR/results.jsonl (rows written by
// examples/bench_ratios.rs, scripts/bench/page.mjs and scripts/bench.sh).
//
//   node scripts/bench/table.mjs build/bench
import { readFileSync } from 'node:fs';
import { join } from 'node:path';

const dir = process.argv[2] ?? 'build/bench';
const lines = readFileSync(join(dir, 'results.jsonl'), 'utf8').split('\n').filter(Boolean).map((l) => JSON.parse(l));
const facts = lines.filter((l) => l.fact);
const rows = lines.filter((l) => l.what);
const checks = lines.filter((l) => l.check);

const machine = readFileSync(join(dir, 'machine.txt'), 'utf8').trimEnd();
console.log(machine);
for (const f of facts) console.log(`${`${f.fact}:`.padEnd(10)}${f.text}`);
console.log('');

const fmt = (x) => (x >= 100 ? x.toFixed(0) : x >= 10 ? x.toFixed(1) : x >= 1 ? x.toFixed(2) : x.toFixed(3));
const status = (r) => (r.met === true ? 'met' : r.met === false ? 'MISSED' : '');
const table = [['#', 'measure', 'ours', 'reference', 'ratio', 'spread (min–max)', 'target', '']];
rows.forEach((r, i) => {
  table.push([String(i + 1), r.what, r.ours, r.reference, `${fmt(r.ratio)}×`,
    r.rounds > 1 ? `${fmt(r.lo)}–${fmt(r.hi)} (${r.rounds})` : '', r.target ?? '', status(r)]);
});
const widths = table[0].map((_, c) => Math.max(...table.map((row) => [...row[c]].length)));
const line = (row) => row.map((cell, c) => cell + ' '.repeat(widths[c] - [...cell].length)).join('  ').trimEnd();
console.log(line(table[0]));
console.log(widths.map((w) => '-'.repeat(w)).join('  '));
for (const row of table.slice(1)) console.log(line(row));
console.log('');
console.log('What each ratio is:');
rows.forEach((r, i) => console.log(`  ${i + 1}. ${r.means}${r.note ? `; ${r.note}` : ''}`));
console.log('');
console.log('Checks (equivalence of the two sides; no check is about time):');
for (const c of checks) console.log(`  [${c.ok ? 'ok' : 'MISMATCH'}] ${c.check}: ${c.text}`);
console.log('');
console.log('Ratios are medians of per-round ratios, each round timing both sides back to back (alternating which goes');
console.log('first). Targets are aims, not assertions: nothing in `make bench` fails on a time.');
