import fs from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';

// Every external check names its published source (document and table/section/equation), or says "common
// practice" or "from memory". A working note of the team is not a source, and the repository speaks of the
// product only. This test fails when a file cites such a note or a planning document instead of a publication.
const root = path.resolve(import.meta.dirname, '../..');
const scanned = ['tests', 'server', 'shared', 'src', 'seeds', 'scripts', 'docs'];
const extensions = new Set(['.ts', '.tsx', '.mjs', '.js', '.md']);
// The names are assembled here so that this file does not itself cite what it forbids.
const noteFile = (stem: string) => new RegExp(`\\b${stem}\\.md\\b`, 'i');
const forbidden: { pattern: RegExp; why: string }[] = [
  { pattern: noteFile('references'), why: 'cites an internal reference note instead of the published source' },
  { pattern: noteFile('design'), why: 'cites an internal design note' },
  { pattern: noteFile('conventions'), why: 'cites an internal conventions note' },
  { pattern: new RegExp(['examples', 'to', 'follow'].join('-'), 'i'), why: 'cites an internal note' },
  { pattern: new RegExp(`\\bthe ${'brief'}\\b`, 'i'), why: 'speaks of how the work was commissioned, not of the product' },
  { pattern: new RegExp(`${'search'} tool|${'helper'} session`, 'i'), why: 'speaks of the tools used to write the product' },
];

function* files(dir: string): Generator<string> {
  for (const entry of fs.readdirSync(dir, { withFileTypes: true })) {
    if (entry.name === 'node_modules' || entry.name.startsWith('.')) continue;
    const full = path.join(dir, entry.name);
    if (entry.isDirectory()) yield* files(full);
    else if (extensions.has(path.extname(entry.name))) yield full;
  }
}

describe('sources are published documents', () => {
  it('no file cites an internal note or planning document', () => {
    const self = path.relative(root, import.meta.filename);
    const hits: string[] = [];
    const all = [...scanned.flatMap((d) => [...files(path.join(root, d))]), path.join(root, 'README.md'), path.join(root, 'DEVELOPERS.md')];
    for (const file of all) {
      const rel = path.relative(root, file);
      if (rel === self) continue;
      fs.readFileSync(file, 'utf8').split('\n').forEach((line, i) => {
        for (const { pattern, why } of forbidden) if (pattern.test(line)) hits.push(`${rel}:${i + 1} ${why}`);
      });
    }
    expect(hits).toEqual([]);
    // The scan must have read the test and science files, or it proves nothing.
    expect(all.some((f) => f.includes(`${path.sep}science${path.sep}`))).toBe(true);
    expect(all.filter((f) => f.endsWith('.test.ts')).length).toBeGreaterThan(20);
  });

  it('the check itself catches a citation of the reference note', () => {
    const citation = `expected value (${['references', 'md'].join('.')} §4.2)`;
    expect(forbidden.some(({ pattern }) => pattern.test(citation))).toBe(true);
    expect(forbidden.some(({ pattern }) => pattern.test('expected value (NIST SP 1065, Table 5)'))).toBe(false);
  });
});
