/**
 * `skein review …` and `skein report …`: the review requests from the command line. Usage problems print one line
 * and return 2; SkeinErrors go up to main (one line, exit 1). An import that leaves conflicts open prints them and
 * returns 3, so a script can tell "merged, needs a decision" from "failed".
 */
import fs from 'node:fs';
import path from 'node:path';
import { parseRequest, type Api } from '../api/index.ts';
import { UsageError, parse, unitArg } from './args.ts';
import type { ConflictDetail, FieldValue, ImportResult, ReviewPreview, UnitReview } from '../api/review.ts';

export const REVIEW_HELP = `  skein review edit <study> <layer> <unit> [--tag T]… [--untag T]… [--note TEXT | --note-file F] [--status S] [--reviewer NAME]
  skein review show <study> <layer> <unit> [--json]
  skein review list <study> [--tag T] [--status S] [--layer L] [--filter k=v,…] [--json]
  skein review undo <study> [--reviewer NAME]        revert your newest edit (repeat to go further back)
  skein review resolve <study> <layer> <unit> <field> here|bundle [--reviewer NAME]
  skein review export <study> --out bundle.json [--tag T] [--status S] [--layer L] [--filter k=v,…]
  skein review import <study> <bundle.json> [--preview] [--map-by-name | --map a=b,…] [--keep here|bundle] [--json]
                                  exit 3 when conflicts are left open (they are listed)
  skein review reviewer [NAME]    show or set your reviewer name (stored in the preferences file)
  skein report <study> --out report.html [--csv out.csv] [--top K | --tag T | --status S | --layer L | --all | --filter k=v,…]
      no selection: the K top-ranked units (20 by default) with any review of them; --all: every reviewed unit
      filter keys: tag, status, layer, reviewer, text, conflicted; statuses: unreviewed looking confirmed doubtful parked`;

/** Exit code of an import that merged but left conflicts for a person to decide. */
export const EXIT_CONFLICTS = 3;

const FILTER_OPTIONS = {
  tag: { type: 'string', multiple: true }, status: { type: 'string', multiple: true }, layer: { type: 'string', multiple: true },
  filter: { type: 'string', multiple: true },
} as const;

/** --tag/--status/--layer and --filter tag=a,status=b,layer=L,reviewer=R,text=T,conflicted[=false] → a filter object. */
export function filterFromArgs(values: Record<string, unknown>): Record<string, unknown> {
  const tags = [...((values.tag as string[] | undefined) ?? [])];
  const statuses = [...((values.status as string[] | undefined) ?? [])];
  const layers = [...((values.layer as string[] | undefined) ?? [])];
  const reviewers: string[] = [];
  const f: Record<string, unknown> = {};
  for (const spec of (values.filter as string[] | undefined) ?? []) {
    for (const part of spec.split(',').map((s) => s.trim()).filter(Boolean)) {
      const eq = part.indexOf('=');
      const k = eq < 0 ? part : part.slice(0, eq);
      const v = eq < 0 ? '' : part.slice(eq + 1);
      if (k === 'tag') tags.push(v);
      else if (k === 'status') statuses.push(v);
      else if (k === 'layer') layers.push(v);
      else if (k === 'reviewer') reviewers.push(v);
      else if (k === 'text') f.text = v;
      else if (k === 'conflicted') f.conflicted = v !== 'false' && v !== 'no';
      else throw new UsageError(`--filter: unknown key "${k}" (use tag, status, layer, reviewer, text, conflicted)`);
    }
  }
  if (tags.length) f.tags = tags;
  if (statuses.length) f.statuses = statuses;
  if (layers.length) f.layers = layers;
  if (reviewers.length) f.reviewers = reviewers;
  return f;
}


async function reviewerOf(api: Api, given: unknown): Promise<string> {
  if (typeof given === 'string') return given;
  const prefs = await api['prefs.get']({});
  if (prefs.reviewer) return prefs.reviewer;
  throw new UsageError(`edits are signed with your name: set it once with "skein review reviewer NAME" or pass --reviewer NAME${prefs.problem ? ` (${prefs.problem})` : ''}`);
}

function mappingFrom(values: Record<string, unknown>): unknown {
  if (values['map-by-name'] && values.map) throw new UsageError('give either --map-by-name or --map, not both');
  if (values['map-by-name']) return 'by-name';
  if (typeof values.map !== 'string') return undefined;
  const out: Record<string, string> = {};
  for (const pair of values.map.split(',').map((s) => s.trim()).filter(Boolean)) {
    const eq = pair.indexOf('=');
    if (eq <= 0 || eq === pair.length - 1) throw new UsageError(`--map takes bundleLayer=studyLayer pairs separated by commas, got "${pair}"`);
    out[pair.slice(0, eq)] = pair.slice(eq + 1);
  }
  return out;
}

const show = (v: FieldValue) => (typeof v === 'boolean' ? (v ? 'tagged' : 'not tagged') : JSON.stringify(v.length > 60 ? `${v.slice(0, 59)}…` : v));

export function conflictLines(conflicts: readonly ConflictDetail[]): string[] {
  return conflicts.map((c) => `  ${c.layer} unit ${c.unit}  ${c.field}:  here ${show(c.mine.value)}${c.mine.author ? ` (${c.mine.author})` : ''}  ·  bundle ${show(c.theirs.value)} (${c.theirs.author ?? '?'})`);
}

function printReview(r: UnitReview): void {
  const a = r.annotation;
  console.log(`${a.layer} unit ${a.unit}   status ${a.status}   version ${a.version}${a.reviewer ? `   last change ${a.reviewer} ${a.updatedAt}` : ''}`);
  console.log(`tags: ${a.tags.join(', ') || '(none)'}`);
  console.log(`note:${a.note ? `\n${a.note.split('\n').map((l) => `  ${l}`).join('\n')}` : ' (none)'}`);
  if (r.conflicts.length) console.log(`open conflicts:\n${conflictLines(r.conflicts).join('\n')}`);
  if (r.history.length) {
    console.log('history (newest first):');
    for (const e of r.history) console.log(`  ${e.at}  ${e.author.padEnd(12)} ${e.field} ${show(e.old)} → ${show(e.new)}${e.undoes ? '  (undo)' : ''}${e.origin === 'import' ? '  (imported)' : ''}`);
  }
}

/** Which side of a conflict to keep, in the CLI's words: "here" (this study) or "bundle"; mine/theirs still read. */
function keepOf(word: string | undefined): 'mine' | 'theirs' | null {
  if (word === 'here' || word === 'mine') return 'mine';
  if (word === 'bundle' || word === 'theirs') return 'theirs';
  return null;
}

function printImport(r: ImportResult | ReviewPreview, preview: boolean): void {
  if ('refused' in r && r.refused) {
    console.log(`would be refused: ${r.refused}`);
    return;
  }
  const m = 'merged' in r ? r.merged : { newEvents: r.newEvents, knownEvents: r.knownEvents };
  const verb = preview ? 'would add' : 'added';
  console.log(`${verb} ${m.newEvents} new history event${m.newEvents === 1 ? '' : 's'} (${m.knownEvents} already here); ${r.changes.length} field${r.changes.length === 1 ? '' : 's'} ${preview ? 'would change' : 'changed'}`);
  for (const c of r.changes) console.log(`  ${c.layer} unit ${c.unit}  ${c.field}: ${show(c.from)} → ${show(c.to)} (${c.author})`);
  if ('merged' in r && r.merged.resolved) console.log(`resolved ${r.merged.resolved} conflict${r.merged.resolved === 1 ? '' : 's'}`);
  if (r.conflicts.length) {
    console.log(`${r.conflicts.length} conflict${r.conflicts.length === 1 ? '' : 's'} ${preview ? 'would be' : 'left'} open (both sides changed the field since their common history; nothing of either side is lost):`);
    console.log(conflictLines(r.conflicts).join('\n'));
  }
}

export async function reviewCommand(argv: string[], api: Api): Promise<number> {
  const [sub, ...rest] = argv;
  try {
    switch (sub) {
      case 'edit': {
        const a = parse(rest, { tag: { type: 'string', multiple: true }, untag: { type: 'string', multiple: true }, note: { type: 'string' }, 'note-file': { type: 'string' }, status: { type: 'string' }, reviewer: { type: 'string' }, json: { type: 'boolean' } }, 3);
        const [study, layer, unitText] = a.positionals;
        const unit = unitArg(unitText);
        if (a.values.note !== undefined && a.values['note-file'] !== undefined) throw new UsageError('give either --note or --note-file, not both');
        const note = typeof a.values['note-file'] === 'string' ? fs.readFileSync(a.values['note-file'], 'utf8') : (a.values.note as string | undefined);
        const reviewer = await reviewerOf(api, a.values.reviewer);
        const current = await api['review.get'](parseRequest('review.get', { study, layer, unit }));
        const changes: Record<string, unknown> = {};
        if (a.values.tag) changes.addTags = a.values.tag;
        if (a.values.untag) changes.removeTags = a.values.untag;
        if (note !== undefined) changes.note = note;
        if (a.values.status !== undefined) changes.status = a.values.status;
        if (!Object.keys(changes).length) throw new UsageError('nothing to change: give --tag, --untag, --note, --note-file or --status');
        const next = await api['review.edit'](parseRequest('review.edit', { study, layer, unit, version: current.annotation.version, reviewer, changes }));
        if (a.values.json) console.log(JSON.stringify(next, null, 1));
        else process.stderr.write(`saved ${next.layer} unit ${next.unit} (version ${next.version}): status ${next.status}, tags ${next.tags.join(', ') || '(none)'}\n`);
        return 0;
      }
      case 'show': {
        const a = parse(rest, { json: { type: 'boolean' } }, 3);
        const r = await api['review.get'](parseRequest('review.get', { study: a.positionals[0], layer: a.positionals[1], unit: unitArg(a.positionals[2]) }));
        if (a.values.json) console.log(JSON.stringify(r, null, 1));
        else printReview(r);
        return 0;
      }
      case 'list': {
        const a = parse(rest, { ...FILTER_OPTIONS, json: { type: 'boolean' } }, 1);
        const filter = filterFromArgs(a.values);
        const r = await api['review.list'](parseRequest('review.list', { study: a.positionals[0], filter: Object.keys(filter).length ? filter : undefined }));
        if (a.values.json) { console.log(JSON.stringify(r, null, 1)); return 0; }
        if (!r.count) console.log('No annotated units match. Tag or annotate units with skein review edit.');
        for (let i = 0; i < r.count; i++) {
          console.log(`${r.layers[r.layer[i]]}\t${r.unit[i]}\t${r.status[i]}\t${r.tags[i].join(',')}\t${r.reviewer[i] ?? ''}${r.conflicts[i].length ? `\tCONFLICT ${r.conflicts[i].join(',')}` : ''}\t${r.note[i].split('\n')[0].slice(0, 60)}`);
        }
        return 0;
      }
      case 'undo': {
        const a = parse(rest, { reviewer: { type: 'string' } }, 1);
        const reviewer = await reviewerOf(api, a.values.reviewer);
        const r = await api['review.undo'](parseRequest('review.undo', { study: a.positionals[0], reviewer }));
        if (!r.undone) process.stderr.write(`nothing to undo: ${reviewer} has no edit left to revert in this study\n`);
        else process.stderr.write(`undid the edit of ${r.undone.at} on ${r.undone.layer} unit ${r.undone.unit} (${r.undone.fields.join(', ')})\n`);
        return 0;
      }
      case 'resolve': {
        const a = parse(rest, { reviewer: { type: 'string' } }, 5);
        const [study, layer, unitText, field, keepWord] = a.positionals;
        const keep = keepOf(keepWord);
        if (!keep) throw new UsageError(`the last argument is here (this study's value) or bundle (the bundle's), got "${keepWord}"`);
        const reviewer = await reviewerOf(api, a.values.reviewer);
        await api['review.resolve'](parseRequest('review.resolve', { study, reviewer, resolutions: [{ layer, unit: unitArg(unitText), field, keep }] }));
        process.stderr.write(`resolved ${field} of ${layer} unit ${unitText}: kept ${keep === 'mine' ? "this study's value" : "the bundle's value"}\n`);
        return 0;
      }
      case 'export': {
        const a = parse(rest, { ...FILTER_OPTIONS, out: { type: 'string' }, reviewer: { type: 'string' } }, 1);
        if (typeof a.values.out !== 'string') throw new UsageError('export needs --out bundle.json');
        const filter = filterFromArgs(a.values);
        const prefs = await api['prefs.get']({});
        const reviewer = (a.values.reviewer as string | undefined) ?? prefs.reviewer ?? undefined;
        const r = await api['review.export'](parseRequest('review.export', { study: a.positionals[0], out: a.values.out, filter: Object.keys(filter).length ? filter : undefined, reviewer }));
        process.stderr.write(`wrote ${r.units} unit${r.units === 1 ? '' : 's'} with ${r.events} history events to ${r.file} (${r.bytes} bytes)\n`);
        return 0;
      }
      case 'import': {
        const a = parse(rest, { preview: { type: 'boolean' }, 'map-by-name': { type: 'boolean' }, map: { type: 'string' }, keep: { type: 'string' }, reviewer: { type: 'string' }, json: { type: 'boolean' } }, 2);
        const [study, file] = a.positionals;
        const mapping = mappingFrom(a.values);
        if (a.values.preview) {
          const p = await api['review.preview'](parseRequest('review.preview', { study, file, mapping }));
          if (a.values.json) console.log(JSON.stringify(p, null, 1));
          else printImport(p, true);
          return p.refused ? 1 : p.conflicts.length ? EXIT_CONFLICTS : 0;
        }
        const keep = a.values.keep === undefined ? undefined : keepOf(a.values.keep as string);
        if (keep === null) throw new UsageError(`--keep is here (this study's values) or bundle (the bundle's), got "${a.values.keep}"`);
        let resolutions: unknown[] | undefined;
        let reviewer: string | undefined = a.values.reviewer as string | undefined;
        if (keep) {
          const p = await api['review.preview'](parseRequest('review.preview', { study, file, mapping }));
          if (p.refused) throw new UsageError(p.refused.replace(/\.$/, ''));
          resolutions = p.conflicts.map((c) => ({ layer: c.layer, unit: c.unit, field: c.field, keep }));
          if (resolutions.length) reviewer = await reviewerOf(api, a.values.reviewer);
        }
        const r = await api['review.import'](parseRequest('review.import', { study, file, mapping, resolutions, reviewer }));
        if (a.values.json) console.log(JSON.stringify(r, null, 1));
        else printImport(r, false);
        if (r.conflicts.length) {
          process.stderr.write(`skein review import: ${r.conflicts.length} conflict${r.conflicts.length === 1 ? '' : 's'} left open. Decide them: rerun with --keep here|bundle, or skein review resolve ${study} <layer> <unit> <field> here|bundle.\n`);
          return EXIT_CONFLICTS;
        }
        return 0;
      }
      case 'reviewer': {
        const a = parse(rest, {}, [0, 1]);
        const prefs = a.positionals.length ? await api['prefs.set'](parseRequest('prefs.set', { reviewer: a.positionals[0] })) : await api['prefs.get']({});
        if (prefs.problem) process.stderr.write(`${prefs.problem}\n`);
        console.log(prefs.reviewer ?? '(no reviewer name set: skein review reviewer NAME)');
        process.stderr.write(`preferences: ${prefs.file}\n`);
        return 0;
      }
      default:
        throw new UsageError(sub ? `unknown review command "${sub}"` : 'say what to do: edit, show, list, undo, resolve, export, import or reviewer');
    }
  } catch (e) {
    if (e instanceof UsageError) {
      process.stderr.write(`skein review ${sub ?? ''}: ${e.message}. Run skein help for usage.\n`);
      return 2;
    }
    throw e;
  }
}

/** Units in a report written with no selection: the top of the ranking. */
export const DEFAULT_REPORT_TOP = 20;

export async function reportCommand(argv: string[], api: Api): Promise<number> {
  try {
    const a = parse(argv, { ...FILTER_OPTIONS, out: { type: 'string' }, csv: { type: 'string' }, all: { type: 'boolean' }, top: { type: 'string' }, reviewer: { type: 'string' } }, 1);
    if (typeof a.values.out !== 'string') throw new UsageError('report needs --out report.html');
    const study = a.positionals[0];
    let filter = filterFromArgs(a.values);
    const selected = Object.keys(filter).length > 0;
    if (a.values.all && selected) throw new UsageError('--all takes every annotated unit; leave out the other filters or --all');
    if (a.values.top !== undefined && (selected || a.values.all)) throw new UsageError('--top picks the top-ranked units; leave out the other filters or --top');
    if (a.values.all) {
      const reviewed = await api['review.list'](parseRequest('review.list', { study }));
      if (reviewed.count === 0) {
        process.stderr.write(`skein report: no unit of ${study} has a review yet, so --all selects nothing and no report was written. Leave out --all for the top-ranked units, or review units first (skein review edit … --tag T).\n`);
        return 1;
      }
    } else if (!selected) {
      // No selection: the study's results, the top-ranked units, with any review of them.
      const top = a.values.top === undefined ? DEFAULT_REPORT_TOP : Number(a.values.top);
      if (!Number.isInteger(top) || top < 1) throw new UsageError(`--top needs a whole number of units, got "${a.values.top}"`);
      const ranked = await api['study.rank'](parseRequest('study.rank', { study, top }));
      filter = { units: ranked.map((r) => ({ layer: r.layer, unit: r.unit })) };
    }
    const r = await api['report.write'](parseRequest('report.write', {
      study, out: a.values.out, csv: a.values.csv, filter, reviewer: a.values.reviewer,
    }));
    process.stderr.write(`wrote ${r.units} unit${r.units === 1 ? '' : 's'} to ${r.file} (${Math.round(r.bytes / 1024)} KiB)${r.csv ? ` and ${path.basename(r.csv)}` : ''}\n`);
    return 0;
  } catch (e) {
    if (e instanceof UsageError) {
      process.stderr.write(`skein report: ${e.message}. Run skein help for usage.\n`);
      return 2;
    }
    throw e;
  }
}
