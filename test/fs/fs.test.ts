/**
 * core/fs: the one containment rule and the one durable write every module uses. The edge cases are the ones the
 * four former copies disagreed on (the folder itself, a sibling sharing a name prefix, "..", links out, a file not
 * yet created); the expected answers follow POSIX path resolution (common practice, no source).
 */
import fs from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { isInside, isInsideAny, resolveLinks, writeDurably, writeFileDurably } from '../../core/fs/index.ts';
import { tempDir } from '../support/fixtures.ts';

describe('isInside', () => {
  const root = fs.realpathSync(tempDir());
  const folder = path.join(root, 'probes');
  fs.mkdirSync(path.join(folder, 'img'), { recursive: true });
  fs.writeFileSync(path.join(folder, 'img', 'a.png'), 'x');
  fs.mkdirSync(path.join(root, 'probes-old'));
  fs.writeFileSync(path.join(root, 'secret.txt'), 'x');
  fs.symlinkSync(path.join(root, 'secret.txt'), path.join(folder, 'out.txt'));
  fs.symlinkSync(folder, path.join(root, 'link-to-probes'));

  it('counts the folder itself and everything below it, existing or not', () => {
    expect(isInside(folder, folder)).toBe(true);
    expect(isInside(folder, path.join(folder, 'img', 'a.png'))).toBe(true);
    expect(isInside(folder, path.join(folder, 'img', 'not-yet', 'b.png'))).toBe(true);
  });

  it('refuses the parent, a sibling with the same name prefix, and ".." that climbs out', () => {
    expect(isInside(folder, root)).toBe(false);
    expect(isInside(folder, path.join(root, 'probes-old'))).toBe(false);
    expect(isInside(folder, path.join(folder, '..', 'secret.txt'))).toBe(false);
    expect(isInside(folder, path.join(folder, 'img', '..', 'img', 'a.png'))).toBe(true);
  });

  it('follows links: a link inside that points out is outside, a link to the folder is the folder', () => {
    expect(isInside(folder, path.join(folder, 'out.txt'))).toBe(false);
    expect(isInside(path.join(root, 'link-to-probes'), path.join(folder, 'img', 'a.png'))).toBe(true);
    expect(isInside(folder, path.join(root, 'link-to-probes', 'img', 'a.png'))).toBe(true);
    expect(resolveLinks(path.join(root, 'link-to-probes', 'new.txt'))).toBe(path.join(folder, 'new.txt'));
  });

  it('accepts a path inside any of several folders', () => {
    expect(isInsideAny(path.join(root, 'probes-old', 'x'), [folder, path.join(root, 'probes-old')])).toBe(true);
    expect(isInsideAny(path.join(root, 'secret.txt'), [folder, path.join(root, 'probes-old')])).toBe(false);
  });
});

describe('writeFileDurably', () => {
  it('replaces a file whole and leaves no temporary file behind', () => {
    const dir = tempDir();
    const file = path.join(dir, 'sub', 'out.json');
    writeFileDurably(file, 'first');
    writeFileDurably(file, Buffer.from('second'));
    expect(fs.readFileSync(file, 'utf8')).toBe('second');
    expect(fs.readdirSync(path.dirname(file))).toEqual(['out.json']);
  });

  it('keeps the old file when writing fails part-way, and names the file in an io error', () => {
    const dir = tempDir();
    const file = path.join(dir, 'out.bin');
    writeFileDurably(file, 'old');
    expect(() => writeDurably(file, (fd) => { fs.writeSync(fd, 'half'); throw new Error('disk full'); }))
      .toThrow(expect.objectContaining({ code: 'io', file, message: expect.stringContaining('disk full') }));
    expect(fs.readFileSync(file, 'utf8')).toBe('old');
    expect(fs.readdirSync(dir)).toEqual(['out.bin']);
    // A RangeError says the caller's data is wrong: it goes through unchanged.
    expect(() => writeDurably(file, () => { throw new RangeError('3 values for shape [4]'); })).toThrow(RangeError);
    expect(fs.readdirSync(dir)).toEqual(['out.bin']);
  });

  it('refuses a target that is a folder, leaving it as it was', () => {
    const dir = tempDir();
    fs.mkdirSync(path.join(dir, 'taken'));
    expect(() => writeFileDurably(path.join(dir, 'taken'), 'x')).toThrow(expect.objectContaining({ code: 'io' }));
    expect(fs.statSync(path.join(dir, 'taken')).isDirectory()).toBe(true);
    expect(fs.readdirSync(dir)).toEqual(['taken']);
  });
});
