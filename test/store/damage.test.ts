/**
 * A damaged study is refused, not read as wrong values: every activation blob carries the CRC-32 the scan wrote
 * (zlib's crc32, the ISO-HDLC / IEEE 802.3 polynomial), checked on read. Issue 10, case 8.
 */
import fs from 'node:fs';
import path from 'node:path';
import { crc32 } from 'node:zlib';
import { beforeAll, describe, expect, it } from 'vitest';
import { createApi, parseRequest, runScan } from '../../core/api/index.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { findLayer, readBinding } from '../../core/store/binding.ts';
import { readUnit } from '../../core/store/activations.ts';
import { encodeFloats } from '../../core/store/codec.ts';
import { isSkeinError } from '../../core/errors.ts';
import { tempDir, writePlanted } from '../support/fixtures.ts';

describe('a study whose activation pages were overwritten', () => {
  let dir: string;
  let study: string;
  let layerId: number;

  beforeAll(async () => {
    dir = tempDir();
    const { model, probes } = writePlanted(dir, 600, 5);
    study = path.join(dir, 'damaged.study');
    await runScan({ model, probes, study, layers: ['planted'], batch: 64 });
  });

  it('zlib crc32 is the standard CRC-32: "123456789" → 0xCBF43926 (the check value of the CRC catalogue, CRC-32/ISO-HDLC)', () => {
    expect(crc32(Buffer.from('123456789'))).toBe(0xcbf43926);
  });

  it('refuses to read or export the damaged values, naming the unit and chunk and the way to recover', async () => {
    // Find unit 1's stored bytes in the file and flip one byte in their middle, as a bad sector or stray write would.
    const db = openStudyDb(study);
    const binding = readBinding(db)!;
    layerId = findLayer(db, 'planted').id;
    const clean = readUnit(db, binding, layerId, 1);
    db.close();
    const blob = encodeFloats(clean.subarray(0, Math.min(clean.length, binding.chunkSize))).blob;
    const bytes = fs.readFileSync(study);
    const probe = Buffer.from(blob.subarray(0, 48));
    const at = bytes.indexOf(probe);
    expect(at).toBeGreaterThan(0);
    expect(bytes.indexOf(probe, at + 1)).toBe(-1); // the pattern is unique, so exactly that blob is hit
    bytes[at + 24] ^= 0x40;
    fs.writeFileSync(study, bytes);

    const reopened = openStudyDb(study);
    let caught: unknown;
    try { readUnit(reopened, readBinding(reopened)!, layerId, 1); } catch (e) { caught = e; }
    reopened.close();
    expect(isSkeinError(caught)).toBe(true);
    const err = caught as { code: string; file: string; where: string; message: string };
    expect(err.code).toBe('study');
    expect(err.file).toBe(study);
    expect(err.where).toBe('layer planted, unit 1, chunk 0');
    expect(err.message).toMatch(/damaged: they no longer match the checksum .* Scan the model again into a new study file/);

    const out = path.join(dir, 'acts.npy');
    const api = createApi();
    await expect(api['export.activations'](parseRequest('export.activations', { study, out, layer: 'planted' })))
      .rejects.toMatchObject({ code: 'study', where: 'layer planted, unit 1, chunk 0' });
    expect(fs.existsSync(out)).toBe(false);
  });
});
