/**
 * Worker thread for the pipelined-scan proposal (bench/figures/scan.ts): writes each chunk the main thread hands
 * over with the scan's own repository call and transaction shape (core/store/activations.ts writeChunk), on its own connection to the
 * study, so SQLite works while onnxruntime computes the next chunk on the main thread.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { openStudyDb } from '../../core/store/study.ts';
import { writeChunk } from '../../core/store/activations.ts';

interface ChunkMessage {
  chunk: number;
  layers: { id: number; units: number; length: number; values: Float32Array }[];
}

const db = openStudyDb((workerData as { study: string }).study);

parentPort!.on('message', (m: ChunkMessage | 'close') => {
  if (m === 'close') {
    db.close();
    parentPort!.postMessage('closed');
    return;
  }
  // All layers of a chunk share its length.
  writeChunk(db, m.chunk, m.layers[0]?.length ?? 0, m.layers.map((l) => ({ layerId: l.id, units: l.units, values: l.values, argmax: null })));
  parentPort!.postMessage(m.chunk);
});
