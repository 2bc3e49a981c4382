/**
 * A second process editing a study through the real API (what an app instance does), for the durability and
 * two-writer tests. Usage:
 *   tsx child.ts ack <study> <layer>            edit units round-robin forever, printing "ack <i> <unit> <version>"
 *                                               on stdout after each edit is committed
 *   tsx child.ts append <study> <layer> <unit> <name> <count>
 *                                               append lines "<name>-<k>" to one unit's note, re-reading and
 *                                               retrying on 'conflict'; prints "done <retries>"
 */
import { createApi, dispatch, toErrorInfo } from '../../core/api/index.ts';
import type { Annotation } from '../../core/api/review.ts';

const [mode, study, layer, ...rest] = process.argv.slice(2);
const ctx = {};
const api = createApi(ctx);
const call = <T>(m: string, b: unknown) => dispatch(api, ctx, m, b) as Promise<T>;

async function current(unit: number): Promise<Annotation> {
  return (await call<{ annotation: Annotation }>('review.get', { study, layer, unit })).annotation;
}

if (mode === 'ack') {
  const units = 7;
  for (let i = 0; ; i++) {
    const unit = i % units;
    const cur = await current(unit);
    const next = await call<Annotation>('review.edit', { study, layer, unit, version: cur.version, reviewer: 'kim', changes: { note: `edit ${i}`, status: i % 2 ? 'looking' : 'doubtful' } });
    process.stdout.write(`ack ${i} ${unit} ${next.version}\n`);
  }
} else if (mode === 'append') {
  const [unitText, name, countText] = rest;
  const unit = Number(unitText);
  let retries = 0;
  for (let k = 0; k < Number(countText); k++) {
    for (;;) {
      const cur = await current(unit);
      try {
        await call('review.edit', { study, layer, unit, version: cur.version, reviewer: name, changes: { note: `${cur.note}${name}-${k}\n` } });
        break;
      } catch (e) {
        if (toErrorInfo(e).code !== 'conflict') throw e;
        retries++;
      }
    }
  }
  process.stdout.write(`done ${retries}\n`);
} else {
  process.stderr.write(`unknown mode ${mode}\n`);
  process.exit(2);
}
