/**
 * The meeting report: one self-contained HTML file (inline CSS allowed by its hash, inline SVG plots, thumbnails as
 * data: URIs, no script, no URL of any kind, a content-security policy that forbids every fetch but data: images)
 * and a CSV of the same units for spreadsheets.
 */
import crypto from 'node:crypto';
import path from 'node:path';
import type Database from 'better-sqlite3';
import { stringify } from 'csv-stringify/sync';
import { now } from '../store/study.ts';
import { readLayers, readBinding } from '../store/binding.ts';
import { requireScores, rankOfUnit } from '../store/scores.ts';
import { exampleImage, probeLabels, unitDetail, unitDistributions, unitTable, type UnitDetail, type UnitDistributions } from '../api/screens/read-models.ts';
import { describeFilter, filterPredicate, hasContent, selectionKey } from './filter.ts';
import type { ReviewFilter } from './vocabulary.ts';
import { renderNote } from './note.ts';
import {
  conflictDetails, emptyAnnotation, eventsOfUnit, listAnnotations, studyFingerprints,
  type Annotation, type ConflictDetail, type StoredEvent,
} from './store.ts';
import { STATUSES, STATUS_MEANING, fieldLabel, type FieldValue } from './vocabulary.ts';
import { escapeXml as esc, MAX_OVERVIEW_POINTS, histogramPlot, mixtureBar, overviewPlot, statusBar, PALETTE, STATUS_COLOURS } from './svg.ts';

/** Thumbnails larger than this are left out of the report (it must stay small enough to mail). */
export const MAX_THUMBNAIL_BYTES = 512 * 1024;
const THUMBNAILS_PER_UNIT = 8;
const HISTORY_PER_UNIT = 8;

export interface ReportExample {
  probe: number; value: number; id: string | null; text: string | null; image: string | null;
  dataUrl: string | null; labels: string[]; imageProblem: string | null;
}

export interface ReportUnit {
  number: number;
  annotation: Annotation;
  detail: UnitDetail | null;
  distributions: UnitDistributions | null;
  examples: ReportExample[];
  history: StoredEvent[];
  conflicts: ConflictDetail[];
  /** Why scores or plots are missing for this unit, when they are. */
  problem: string | null;
}

export interface ReportData {
  studyFile: string;
  generatedAt: string;
  generatedBy: string | null;
  model: { path: string; fingerprint: string };
  probes: { name: string; fingerprint: string; count: number };
  selection: string;
  units: ReportUnit[];
  all: { x: number; y: number }[];
}

/** Gathers the units the filter selects, most polysemantic first, with what the report shows of each. */
export function gatherReport(db: Database.Database, studyFile: string, filter: ReviewFilter, generatedBy: string | null): ReportData {
  requireScores(db, studyFile);
  const binding = readBinding(db)!;
  const fps = studyFingerprints(db, studyFile);
  const layers = new Map(readLayers(db).map((l) => [l.name, l]));
  const annotations = new Map(listAnnotations(db, fps).map((a) => [selectionKey(a.layer, a.unit), a]));
  const candidates = new Map<string, Annotation>();
  for (const [k, a] of annotations) if (hasContent(a)) candidates.set(k, a);
  for (const u of filter.units ?? []) {
    const k = selectionKey(u.layer, u.unit);
    if (!candidates.has(k)) candidates.set(k, annotations.get(k) ?? emptyAnnotation(u.layer, u.unit));
  }
  const chosen = [...candidates.values()].filter(filterPredicate(filter));
  const ranked = chosen.map((a) => ({ a, rank: rankOfUnit(db, a.layer, a.unit) ?? Number.MAX_SAFE_INTEGER }))
    .sort((x, y) => x.rank - y.rank || x.a.layer.localeCompare(y.a.layer) || x.a.unit - y.a.unit);

  const units: ReportUnit[] = ranked.map(({ a }, i) => {
    const key = { ...fps, layer: a.layer, unit: a.unit };
    const events = eventsOfUnit(db, key);
    const base = { number: i + 1, annotation: a, history: events.slice(-HISTORY_PER_UNIT).reverse(), conflicts: conflictDetails(a, events) };
    const layer = layers.get(a.layer);
    if (!layer || a.unit >= layer.units) {
      return { ...base, detail: null, distributions: null, examples: [], problem: `Layer ${a.layer} unit ${a.unit} is not in the current scan, so there are no scores for it.` };
    }
    const detail = unitDetail(db, a.layer, a.unit, studyFile);
    let distributions: UnitDistributions | null = null;
    let problem: string | null = null;
    try {
      distributions = unitDistributions(db, a.layer, a.unit, { bins: 36, maxLabels: 4, file: studyFile });
    } catch (e) {
      problem = `No activation plot: ${(e as Error).message}`;
    }
    const top = detail.topExamples.slice(0, THUMBNAILS_PER_UNIT);
    const labels = probeLabels(db, top.map((t) => t.probe));
    const examples = top.map((t, k): ReportExample => {
      let dataUrl: string | null = null;
      let imageProblem: string | null = null;
      if (t.image) {
        try {
          const img = exampleImage(db, t.probe, studyFile);
          if (img.bytes > MAX_THUMBNAIL_BYTES) imageProblem = `image left out (${Math.round(img.bytes / 1024)} KiB)`;
          else dataUrl = img.dataUrl;
        } catch (e) {
          imageProblem = (e as Error).message;
        }
      }
      return { probe: t.probe, value: t.value, id: t.id, text: t.text, image: t.image, dataUrl, labels: labels[k], imageProblem };
    });
    return { ...base, detail, distributions, examples, problem };
  });

  const table = unitTable(db, studyFile);
  const all = table.conceptCount.map((x, i) => ({ x: x ?? NaN, y: table.selectivity[i] ?? NaN }));
  return {
    studyFile: path.resolve(studyFile), generatedAt: now(), generatedBy,
    model: { path: binding.modelPath, fingerprint: binding.modelFp },
    probes: { name: binding.probesName, fingerprint: binding.probesFp, count: binding.probeCount },
    selection: describeFilter(filter), units, all,
  };
}

const CSS = `
:root{--ink:#1f2328;--muted:#5b636d;--line:#d9dde2;--soft:#f4f5f7;--accent:#3567a0}
*{box-sizing:border-box}
body{margin:0;font:14px/1.45 system-ui,-apple-system,"Segoe UI",Roboto,"Noto Sans",sans-serif;color:var(--ink);background:#fff}
main{max-width:1000px;margin:0 auto;padding:28px 28px 60px}
h1{font-size:22px;margin:0 0 4px}
h2{font-size:16px;margin:28px 0 10px;padding-bottom:4px;border-bottom:1px solid var(--line)}
h3{font-size:15px;margin:0}
.meta{color:var(--muted);font-size:12.5px}
.meta code,.fp{font:12px ui-monospace,SFMono-Regular,Menlo,Consolas,monospace}
.caveat{margin:12px 0;padding:8px 12px;background:#fff8e6;border-left:3px solid #d6a532;font-size:13px}
table{border-collapse:collapse;width:100%;font-size:13px}
th,td{text-align:left;padding:4px 8px;border-bottom:1px solid var(--line);vertical-align:top}
th{font-weight:600;color:var(--muted);font-size:12px;background:var(--soft)}
td.num,th.num{text-align:right;font-variant-numeric:tabular-nums}
a{color:var(--accent);text-decoration:none}
.unit{margin:22px 0;padding:14px 16px 16px;border:1px solid var(--line);border-radius:6px;break-inside:avoid}
.unit-head{display:flex;flex-wrap:wrap;align-items:baseline;gap:10px;margin-bottom:8px}
.badge{display:inline-block;min-width:24px;padding:1px 7px;border-radius:10px;background:var(--ink);color:#fff;font-size:12px;text-align:center}
.status{display:inline-block;padding:1px 8px;border-radius:3px;font-size:12px;color:#fff}
.st-unreviewed{background:${STATUS_COLOURS.unreviewed}}.st-looking{background:${STATUS_COLOURS.looking}}.st-confirmed{background:${STATUS_COLOURS.confirmed}}
.st-doubtful{background:${STATUS_COLOURS.doubtful}}.st-parked{background:${STATUS_COLOURS.parked}}
.tag{display:inline-block;padding:0 7px;margin:0 3px 3px 0;border:1px solid var(--line);border-radius:9px;font-size:12px;background:var(--soft)}
.scores{color:var(--muted);font-size:13px;margin-bottom:8px}
.scores b{color:var(--ink);font-weight:600}
.cols{display:grid;grid-template-columns:minmax(0,1fr) minmax(0,1fr);gap:18px}
.cols>div>h4,.block>h4{margin:10px 0 4px;font-size:12px;text-transform:uppercase;letter-spacing:.04em;color:var(--muted)}
svg.plot{max-width:100%;height:auto;display:block}
svg text{font:11px system-ui,sans-serif;fill:#3b4148}
svg text.tick{font-size:10px;fill:#6b727b}svg text.axis{font-size:10.5px;fill:#5b636d}
svg text.muted{fill:#8a9099}svg text.on-bar{fill:#fff;font-size:10.5px;font-weight:600}
svg text.mark{fill:#fff;font-size:8.5px;font-weight:700}
.examples{display:flex;flex-wrap:wrap;gap:8px}
.ex{width:104px;font-size:11px;color:var(--muted)}
.ex img{width:96px;height:96px;object-fit:contain;image-rendering:pixelated;background:var(--soft);border:1px solid var(--line);display:block}
.ex .noimg{width:96px;height:96px;display:flex;align-items:center;justify-content:center;text-align:center;padding:4px;background:var(--soft);border:1px dashed var(--line);font-size:10.5px}
.ex-text{width:100%;font-size:12px;color:var(--ink);padding:3px 6px;border-left:2px solid var(--line)}
.note{padding:6px 12px;background:var(--soft);border-radius:4px}
.note p{margin:6px 0}.note pre{white-space:pre-wrap}
.empty{color:var(--muted);font-style:italic}
.conflict{padding:6px 10px;border-left:3px solid ${STATUS_COLOURS.doubtful};background:#fbeeee;margin:6px 0;font-size:13px}
.history td{font-size:12px;padding:2px 8px}
.problem{color:#8a4b00;font-size:12.5px}
footer{margin-top:36px;color:var(--muted);font-size:12px}
@media print{main{padding:0}.unit{border-color:#bbb}a{color:inherit}}
@media (max-width:760px){.cols{grid-template-columns:1fr}}
`;

/** The report's content-security policy: nothing may be fetched; only data: images and this exact stylesheet. */
export function reportCsp(css: string): string {
  const hash = crypto.createHash('sha256').update(css, 'utf8').digest('base64');
  return `default-src 'none'; img-src data:; style-src 'sha256-${hash}'; base-uri 'none'; form-action 'none'`;
}

const fmt = (x: number | null | undefined, d = 2) => (x === null || x === undefined || !Number.isFinite(x) ? '–' : x.toFixed(d));

function shortValue(v: FieldValue): string {
  if (typeof v === 'boolean') return v ? 'added' : 'removed';
  const one = v.replace(/\s+/g, ' ').trim();
  return one === '' ? '(empty)' : one.length > 80 ? `${one.slice(0, 79)}…` : one;
}

function describeEvent(e: StoredEvent): string {
  if (e.field.startsWith('tag:')) return `${e.new ? 'added' : 'removed'} tag <span class="tag">${esc(e.field.slice(4))}</span>`;
  return `${e.field === 'note' ? 'note' : 'status'} → ${esc(shortValue(e.new))}`;
}

function statusChip(status: string): string {
  return `<span class="status st-${esc(status)}">${esc(status)}</span>`;
}

function unitCard(u: ReportUnit): string {
  const a = u.annotation;
  const d = u.detail;
  const anchor = `u${u.number}`;
  let s = `<section class="unit" id="${anchor}"><div class="unit-head"><span class="badge">${u.number}</span><h3>${esc(a.layer)} · unit ${a.unit}</h3>`;
  if (d) s += `<span class="meta">rank ${d.rank + 1}</span>`;
  s += statusChip(a.status);
  for (const t of a.tags) s += `<span class="tag">${esc(t)}</span>`;
  s += `</div>`;
  if (d) {
    s += `<div class="scores">concept count <b>${fmt(d.conceptCount)}</b> · selectivity <b>${fmt(d.selectivity)}</b> · active on <b>${fmt(d.activeFraction * 100, 1)}%</b> of probes`;
    if (d.flags.length) s += ` · flags <b>${esc(d.flags.join(', '))}</b>`;
    if (d.explanation) s += ` · best formula <b>${esc(d.explanation.formula)}</b> (IoU ${fmt(d.explanation.iou)})`;
    s += `</div>`;
  }
  if (u.problem) s += `<p class="problem">${esc(u.problem)}</p>`;
  if (d) {
    s += `<div class="cols"><div><h4>Mixture of driving labels</h4>${mixtureBar(d.drivers)}`;
    if (d.drivers.length) {
      s += `<table><tr><th>label</th><th class="num">share</th><th class="num">AUROC</th><th class="num">q</th></tr>`;
      for (const x of d.drivers) s += `<tr><td>${esc(x.label)}</td><td class="num">${Math.round(x.share * 100)}%</td><td class="num">${fmt(x.auroc, 3)}</td><td class="num">${x.q.toExponential(1)}</td></tr>`;
      s += `</table>`;
    }
    s += `</div><div><h4>Activations</h4>`;
    if (u.distributions) {
      s += histogramPlot(u.distributions);
    }
    s += `</div></div>`;
    s += `<div class="block"><h4>Top examples</h4><div class="examples">`;
    for (const e of u.examples) {
      const caption = `${esc(e.id ?? `probe ${e.probe}`)} · ${fmt(e.value, 3)}<br>${esc(e.labels.join(', '))}`;
      if (e.dataUrl) s += `<div class="ex"><img src="${e.dataUrl}" alt="${esc(e.id ?? `probe ${e.probe}`)}"><div>${caption}</div></div>`;
      else if (e.text) s += `<div class="ex-text">${esc(e.text.slice(0, 300))} <span class="meta">(${caption})</span></div>`;
      else s += `<div class="ex"><div class="noimg">${esc(e.imageProblem ?? 'no image')}</div><div>${caption}</div></div>`;
    }
    s += `</div></div>`;
  }
  s += `<div class="block"><h4>Note</h4>${a.note ? `<div class="note">${renderNote(a.note, { links: false })}</div>` : '<p class="empty">no note</p>'}</div>`;
  for (const c of u.conflicts) {
    s += `<div class="conflict">Open conflict on the ${esc(fieldLabel(c.field))}: here “${esc(shortValue(c.mine.value))}”${c.mine.author ? ` (${esc(c.mine.author)})` : ''}, other side “${esc(shortValue(c.theirs.value))}” (${esc(c.theirs.author ?? '?')}). Resolve it before relying on this unit.</div>`;
  }
  if (u.history.length) {
    s += `<div class="block"><h4>Recent history</h4><table class="history">`;
    for (const e of u.history) s += `<tr><td class="fp">${esc(e.at.slice(0, 16).replace('T', ' '))}</td><td>${esc(e.author)}</td><td>${describeEvent(e)}${e.undoes ? ' (undo)' : ''}</td></tr>`;
    s += `</table></div>`;
  }
  return s + `</section>`;
}

export function renderReportHtml(r: ReportData): string {
  const counts = STATUSES.map((status) => ({ status, count: r.units.filter((u) => u.annotation.status === status).length }));
  const marks = r.units.filter((u) => u.detail).map((u) => ({
    x: u.detail!.conceptCount, y: u.detail!.selectivity, label: String(u.number), colour: STATUS_COLOURS[u.annotation.status] ?? PALETTE[0],
  }));
  const title = `Review meeting · ${r.probes.name} · ${path.basename(r.model.path)}`;
  let body = `<h1>${esc(title)}</h1>`;
  body += `<div class="meta">${r.units.length} unit${r.units.length === 1 ? '' : 's'}: ${esc(r.selection)} · generated ${esc(r.generatedAt.slice(0, 16).replace('T', ' '))} UTC${r.generatedBy ? ` by ${esc(r.generatedBy)}` : ''}<br>`;
  body += `study <code>${esc(path.basename(r.studyFile))}</code> · model <code>${esc(path.basename(r.model.path))}</code> <span class="fp">${esc(r.model.fingerprint.slice(0, 16))}</span> · probe set <code>${esc(r.probes.name)}</code> (${r.probes.count} probes) <span class="fp">${esc(r.probes.fingerprint.slice(0, 16))}</span></div>`;
  body += `<div class="caveat">Scores and drivers are statistical hypotheses about the model on this probe set, not proof. Notes and statuses are the reviewers' judgement.</div>`;
  body += `<h2>Status</h2>${statusBar(counts)}<div class="meta">${STATUSES.map((s) => `<b>${s}</b>: ${esc(STATUS_MEANING[s])}`).join(' · ')}</div>`;
  if (r.units.length) {
    body += `<h2>Where these units sit</h2>${overviewPlot(r.all, marks)}<div class="meta">grey: all ${r.all.length} scored units${r.all.length > MAX_OVERVIEW_POINTS ? ' (binned: darker = more units)' : ''}; numbered dots: the units of this report, coloured by status.</div>`;
    body += `<h2>Units</h2><table><tr><th class="num">#</th><th>layer</th><th class="num">unit</th><th class="num">rank</th><th class="num">concepts</th><th>drivers</th><th>status</th><th>tags</th><th>last change</th></tr>`;
    for (const u of r.units) {
      const a = u.annotation;
      body += `<tr><td class="num"><a href="#u${u.number}">${u.number}</a></td><td>${esc(a.layer)}</td><td class="num">${a.unit}</td><td class="num">${u.detail ? u.detail.rank + 1 : '–'}</td>`;
      body += `<td class="num">${fmt(u.detail?.conceptCount)}</td><td>${esc((u.detail?.drivers ?? []).map((x) => x.label).join(', '))}</td><td>${statusChip(a.status)}</td>`;
      body += `<td>${a.tags.map((t) => `<span class="tag">${esc(t)}</span>`).join('')}</td><td>${esc(a.reviewer ?? '')}${a.updatedAt ? ` <span class="meta">${esc(a.updatedAt.slice(0, 10))}</span>` : ''}</td></tr>`;
    }
    body += `</table>`;
    for (const u of r.units) body += unitCard(u);
  } else {
    body += `<p class="empty">No unit matches this selection. Tag or annotate units first, or choose another filter.</p>`;
  }
  body += `<footer>Made by Skein from the study's own data; this file needs no network and runs no script.</footer>`;
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="${reportCsp(CSS)}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="referrer" content="no-referrer">
<title>${esc(title)}</title>
<style>${CSS}</style></head>
<body><main>${body}</main></body></html>
`;
}

export const CSV_COLUMNS = ['layer', 'unit', 'rank', 'concept_count', 'selectivity', 'active_fraction', 'flags', 'mixture', 'drivers', 'explanation', 'explanation_iou',
  'top_examples', 'top_example_images', 'status', 'tags', 'note', 'reviewer', 'updated_at', 'open_conflicts'];

/** One row per report unit; mixture is label:share, drivers label AUROC q, examples id:value (probe number when no id). */
export function renderReportCsv(r: ReportData): string {
  const rows = r.units.map((u) => {
    const a = u.annotation;
    const d = u.detail;
    return [
      a.layer, a.unit, d ? d.rank + 1 : '', d ? d.conceptCount : '', d ? d.selectivity : '', d ? d.activeFraction : '', d ? d.flags.join(' ') : '',
      d ? d.drivers.map((x) => `${x.label}:${x.share.toFixed(4)}`).join(' ') : '',
      d ? d.drivers.map((x) => `${x.label} ${x.auroc.toFixed(4)} ${x.q.toExponential(3)}`).join('; ') : '',
      d?.explanation?.formula ?? '', d?.explanation?.iou ?? '',
      u.examples.map((e) => `${e.id ?? e.probe}:${e.value.toFixed(4)}`).join(' '),
      u.examples.map((e) => e.image ?? '').filter(Boolean).join(' '),
      a.status, a.tags.join(' '), a.note, a.reviewer ?? '', a.updatedAt ?? '', a.conflicts.join(' '),
    ];
  });
  return stringify(rows, { header: true, columns: CSV_COLUMNS });
}
