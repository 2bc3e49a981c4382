/**
 * The review commands end to end through the real `skein` binary: two reviewers on two copies of one scanned study
 * exchange bundles; an import with conflicts lists them and exits non-zero; deciding them merges both ways.
 */
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { tempDir } from '../support/fixtures.ts';
import { copyStudy, reviewDump, scannedStudy } from './helpers.ts';

const bin = path.resolve(import.meta.dirname, '../../core/cli/bin.js');

function skein(args: string[], home: string) {
  const r = spawnSync(process.execPath, [bin, ...args], { encoding: 'utf8', env: { ...process.env, SKEIN_HOME: home } });
  return { code: r.status, out: r.stdout, err: r.stderr };
}

describe('skein review and skein report', () => {
  let dir: string;
  let mine: string;
  let study: string;
  let theirs: string;
  let anaHome: string;
  let benHome: string;

  beforeAll(async () => {
    const s = await scannedStudy();
    study = s.study;
    dir = tempDir('skein-cli-review-');
    mine = copyStudy(s.study, path.join(dir, 'ana.study'));
    theirs = copyStudy(s.study, path.join(dir, 'ben.study'));
    anaHome = path.join(dir, 'ana-home');
    benHome = path.join(dir, 'ben-home');
  });

  it('asks for a reviewer name before the first edit, then remembers it', () => {
    const no = skein(['review', 'edit', mine, 'planted', '3', '--tag', 'mixed'], anaHome);
    expect(no.code).toBe(2);
    expect(no.err).toMatch(/set it once with "skein review reviewer NAME" or pass --reviewer NAME/);
    expect(skein(['review', 'reviewer', 'ana'], anaHome).code).toBe(0);
    expect(skein(['review', 'reviewer'], anaHome).out.trim()).toBe('ana');
    expect(JSON.parse(fs.readFileSync(path.join(anaHome, 'preferences.json'), 'utf8'))).toEqual({ reviewer: 'ana' });
    expect(skein(['review', 'reviewer', 'ben'], benHome).code).toBe(0);
  });

  it('exports, imports into another copy, lists conflicts with a non-zero exit, and merges once they are decided', () => {
    let r = skein(['review', 'edit', mine, 'planted', '3', '--tag', 'mixed', '--status', 'confirmed', '--note', 'three concepts'], anaHome);
    expect(r.code, r.err).toBe(0);
    r = skein(['review', 'edit', mine, 'planted', '1', '--tag', 'for-meeting'], anaHome);
    expect(r.code, r.err).toBe(0);
    r = skein(['review', 'edit', theirs, 'planted', '3', '--tag', 'follow-up', '--status', 'doubtful', '--note', 'only two?'], benHome);
    expect(r.code, r.err).toBe(0);

    const anaBundle = path.join(dir, 'ana.json');
    r = skein(['review', 'export', mine, '--out', anaBundle], anaHome);
    expect(r.code, r.err).toBe(0);
    expect(r.err).toMatch(/wrote 2 units with 4 history events/);
    const bundle = JSON.parse(fs.readFileSync(anaBundle, 'utf8'));
    expect(bundle).toMatchObject({ kind: 'skein-review-bundle', schema: 1, exportedBy: 'ana' });

    const before = reviewDump(theirs);
    r = skein(['review', 'import', theirs, anaBundle, '--preview'], benHome);
    expect(r.code).toBe(3);
    expect(r.out).toMatch(/would add 4 new history events/);
    expect(reviewDump(theirs)).toEqual(before);

    r = skein(['review', 'import', theirs, anaBundle], benHome);
    expect(r.code).toBe(3);
    expect(r.out).toMatch(/2 conflicts left open/);
    expect(r.out).toContain('planted unit 3  note:  here "only two?" (ben)  ·  bundle "three concepts" (ana)');
    expect(r.out).toContain('planted unit 3  status:  here "doubtful" (ben)  ·  bundle "confirmed" (ana)');
    expect(r.out).toMatch(/planted unit 3  tag:mixed: not tagged → tagged \(ana\)/);
    expect(r.out).toMatch(/planted unit 1  tag:for-meeting: not tagged → tagged \(ana\)/);
    expect(r.err).toMatch(/2 conflicts left open\. Decide them/);

    // The same import again changes nothing and still reports the open conflicts.
    const once = reviewDump(theirs);
    r = skein(['review', 'import', theirs, anaBundle], benHome);
    expect(r.code).toBe(3);
    expect(r.out).toMatch(/added 0 new history events \(4 already here\)/);
    expect(reviewDump(theirs)).toEqual(once);

    r = skein(['review', 'list', theirs, '--filter', 'conflicted'], benHome);
    expect(r.out).toMatch(/planted\t3\tdoubtful\tfollow-up,mixed\tben\tCONFLICT note,status/);

    r = skein(['review', 'resolve', theirs, 'planted', '3', 'status', 'mine-or-yours'], benHome);
    expect(r.code).toBe(2);
    expect(r.err).toContain('here (this study\'s value) or bundle (the bundle\'s), got "mine-or-yours"');
    r = skein(['review', 'resolve', theirs, 'planted', '3', 'status', 'bundle'], benHome);
    expect(r.code, r.err).toBe(0);
    expect(r.err).toContain("kept the bundle's value");
    r = skein(['review', 'import', theirs, anaBundle, '--keep', 'here'], benHome);
    expect(r.code, r.out + r.err).toBe(0);
    expect(r.out).toMatch(/resolved 1 conflict/);
    const show = JSON.parse(skein(['review', 'show', theirs, 'planted', '3', '--json'], benHome).out);
    expect(show.annotation).toMatchObject({ tags: ['follow-up', 'mixed'], note: 'only two?', status: 'confirmed', conflicts: [] });

    // Ben's decisions travel back: Ana ends with the same review, without conflicts.
    const benBundle = path.join(dir, 'ben.json');
    expect(skein(['review', 'export', theirs, '--out', benBundle], benHome).code).toBe(0);
    r = skein(['review', 'import', mine, benBundle], anaHome);
    expect(r.code, r.out + r.err).toBe(0);
    const back = JSON.parse(skein(['review', 'show', mine, 'planted', '3', '--json'], anaHome).out);
    expect(back.annotation).toMatchObject({ tags: ['follow-up', 'mixed'], note: 'only two?', status: 'confirmed', conflicts: [] });
  });

  it('exports only the filtered units and refuses a hostile bundle with exit 1 and one line', () => {
    const out = path.join(dir, 'tagged.json');
    const r = skein(['review', 'export', mine, '--out', out, '--tag', 'for-meeting'], anaHome);
    expect(r.code, r.err).toBe(0);
    expect(JSON.parse(fs.readFileSync(out, 'utf8')).units.map((u: { unit: number }) => u.unit)).toEqual([1]);
    const bad = path.join(dir, 'bad.json');
    fs.writeFileSync(bad, fs.readFileSync(out, 'utf8').replace('"schema": 1,', '"schema": 1, "schema": 1,'));
    const before = reviewDump(mine);
    const b = skein(['review', 'import', mine, bad], anaHome);
    expect(b.code).toBe(1);
    expect(b.err.trim().split('\n')).toHaveLength(1);
    expect(b.err).toMatch(/bad\.json, line 3, column \d+: The bundle is not valid JSON: the field "schema" appears twice/);
    expect(reviewDump(mine)).toEqual(before);
  });

  it('writes the report and CSV for a tag, a status or all, and says which units to take', () => {
    const html = path.join(dir, 'r.html');
    const csv = path.join(dir, 'r.csv');
    let r = skein(['report', mine, '--out', html, '--csv', csv, '--tag', 'mixed'], anaHome);
    expect(r.code, r.err).toBe(0);
    expect(r.err).toMatch(/wrote 1 unit to .*r\.html/);
    expect(fs.readFileSync(csv, 'utf8').trim().split('\n')).toHaveLength(2);
    r = skein(['report', mine, '--out', html, '--all'], anaHome);
    expect(r.err).toMatch(/wrote 2 units/);
    r = skein(['report', mine, '--out', html, '--status', 'confirmed'], anaHome);
    expect(r.err).toMatch(/wrote 1 unit/);
    // As the README shows it: no selection writes the study's results, its top-ranked units with their reviews.
    const ranked = JSON.parse(skein(['rank', mine, '--json'], anaHome).out) as unknown[];
    r = skein(['report', mine, '--out', html], anaHome);
    expect(r.code, r.err).toBe(0);
    const n = Math.min(20, ranked.length);
    expect(r.err).toMatch(new RegExp(`wrote ${n} units? to`));
    expect(fs.readFileSync(html, 'utf8')).toContain(`${n} selected units`);
    r = skein(['report', mine, '--out', html, '--top', '1'], anaHome);
    expect(r.err).toMatch(/wrote 1 unit to/);
    // --all on a study nobody reviewed says so and writes nothing.
    const fresh = copyStudy(study, path.join(dir, 'fresh.study'));
    const none = path.join(dir, 'none.html');
    r = skein(['report', fresh, '--out', none, '--all'], anaHome);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/has a review yet, so --all selects nothing and no report was written/);
    expect(fs.existsSync(none)).toBe(false);
    expect(skein(['help'], anaHome).out).toMatch(/skein report .*--layer L/);
    r = skein(['report', mine, '--out', html, '--status', 'agreed'], anaHome);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/filter\.statuses\.0: Invalid request report\.write: a status is one of/);
  });
});
