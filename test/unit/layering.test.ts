// Dependency rules from DEVELOPERS.md: app/core imports neither electron, onnxruntime, Svelte nor
// the DOM; renderer/ imports from app/ only protocol modules.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readdirSync, readFileSync, statSync } from 'node:fs';
import { join, relative, resolve, dirname } from 'node:path';

const root = resolve(dirname(new URL(import.meta.url).pathname), '..', '..');

function files(dir: string, exts: string[]): string[] {
  const out: string[] = [];
  for (const name of readdirSync(dir)) {
    const p = join(dir, name);
    if (statSync(p).isDirectory()) out.push(...files(p, exts));
    else if (exts.some((e) => p.endsWith(e))) out.push(p);
  }
  return out;
}

const importsOf = (src: string) => [...src.matchAll(/(?:import|export)\s[^'"]*?from\s*['"]([^'"]+)['"]|import\s*\(\s*['"]([^'"]+)['"]\s*\)|import\s+['"]([^'"]+)['"]/g)].map((m) => m[1] ?? m[2] ?? m[3]);

test('app/core stays free of electron, onnxruntime, svelte and the DOM', () => {
  const bad: string[] = [];
  for (const f of files(join(root, 'app', 'core'), ['.ts'])) {
    const src = readFileSync(f, 'utf8');
    for (const spec of importsOf(src)) if (/^(electron|onnxruntime|svelte)/.test(spec) || spec.includes('/engine/') || spec.includes('/main/')) bad.push(`${relative(root, f)} imports ${spec}`);
    const code = src.replace(/\/\/.*$/gm, '').replace(/\/\*[\s\S]*?\*\//g, '');
    if (/\b(document|window|HTMLElement|navigator)\./.test(code)) bad.push(`${relative(root, f)} uses the DOM`);
  }
  assert.deepEqual(bad, []);
});

test('renderer imports from app/ only the protocol', () => {
  const bad: string[] = [];
  for (const f of files(join(root, 'renderer', 'src'), ['.ts', '.svelte'])) {
    for (const spec of importsOf(readFileSync(f, 'utf8'))) {
      if (!spec.startsWith('.')) {
        if (/^(electron|onnxruntime|node:|fs$|path$)/.test(spec)) bad.push(`${relative(root, f)} imports ${spec}`);
        continue;
      }
      const target = relative(root, resolve(dirname(f), spec));
      if (target.startsWith('app/') && !target.startsWith('app/protocol/')) bad.push(`${relative(root, f)} imports ${target}`);
    }
  }
  assert.deepEqual(bad, []);
});

test('the rule check itself catches a violation', () => {
  assert.deepEqual(importsOf("import * as ort from 'onnxruntime-node';\nimport x from '../engine/host.ts';"), ['onnxruntime-node', '../engine/host.ts']);
});
