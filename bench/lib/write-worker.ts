/**
 * Worker thread for the pipelined-scan proposal (bench/figures/scan.ts): writes each chunk the main thread hands
 * over with the scan's own statements and transaction shape (core/extract/scan.ts), on its own connection to the
 * study, so SQLite works while onnxruntime computes the next chunk on the main thread.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { openStudyDb, floatsToBlob, now } from '../../core/store/study.ts';

interface ChunkMessage {
  chunk: number;
  layers: { id: number; units: number; length: number; values: Float32Array }[];
}

const db = openStudyDb((workerData as { study: string }).study);
const insertAct = db.prepare(`INSERT OR REPLACE INTO activation (layer_id, unit, chunk, vals, argmax) VALUES (?, ?, ?, ?, ?)`);
const insertDone = db.prepare(`INSERT OR REPLACE INTO chunk_done (layer_id, chunk) VALUES (?, ?)`);
const touch = db.prepare(`UPDATE run SET updated_at = ? WHERE id = 1`);

parentPort!.on('message', (m: ChunkMessage | 'close') => {
  if (m === 'close') {
    db.close();
    parentPort!.postMessage('closed');
    return;
  }
  db.transaction(() => {
    for (const l of m.layers) {
      for (let u = 0; u < l.units; u++) insertAct.run(l.id, u, m.chunk, floatsToBlob(l.values.subarray(u * l.length, (u + 1) * l.length)), null);
      insertDone.run(l.id, m.chunk);
    }
    touch.run(now());
  })();
  parentPort!.postMessage(m.chunk);
});
