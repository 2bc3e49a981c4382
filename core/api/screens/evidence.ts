/**
 * The unit page's evidence (request `unit.evidence`): per driver, the probes carrying it alone, with the unit's other
 * drivers, and with none of them (count, mean activation, effect), example probes of each driver on its own, and why
 * the unit ranks where it does. Computed from the cached activations and label sets given the unit's driver list.
 */
import type { z } from 'zod';
import type { screenRequests } from '../requests/screens.ts';
import type Database from 'better-sqlite3';
import { SkeinError } from '../../errors.ts';
import { readBinding, findLayer, labelNames, type StudyBinding } from '../../store/binding.ts';
import { readUnit, readUnitArgmax } from '../../store/activations.ts';
import { unitDetail, probeLabels } from './read-models.ts';
import { probesOfLabel, probeDisplays, rankNeighbours, readJointExtras, readConceptIntervals, type RankNeighbour } from '../../store/evidence.ts';
import { driverPresence, responseTable, type DriverResponse, type ResponseGroup } from '../../score/response.ts';

export type EvidenceRequest = z.infer<(typeof screenRequests)['unit.evidence']>;

export interface EvidenceExample {
  probe: number; value: number;
  /** Flat location of the pooled maximum on conv/sequence layers, else null. */
  location: number | null;
  id: string | null; text: string | null; image: string | null;
  labels: string[];
}

/** One driver's row of the response table (core/score/response.ts), with its name, stored share and example probes. */
export interface DriverEvidence extends Omit<DriverResponse, 'examples'> {
  /** As the scores name it; a compound names its parts joined by " & ". */
  name: string;
  parts: string[];
  /** The stored share of the unit's response and its 90% bootstrap interval (null for a driver the caller supplied). */
  share: number | null;
  shareLow: number | null;
  shareHigh: number | null;
  /** Other drivers the scores count as the same concept, their probes nearly coinciding (stored drivers only). */
  sameAs: string[];
  /** The highest-activating probes that carry this driver and none of the others. */
  examples: EvidenceExample[];
}

export interface RankingReason {
  /** 0-based position in the study-wide ranking. */
  rank: number;
  total: number;
  conceptCount: number;
  /** The concept count's 90% bootstrap interval; the ranking orders by its lower end first. */
  conceptLow: number;
  conceptHigh: number;
  /** Σ −log10 q over the drivers: the tie-breaker. */
  evidence: number;
  flags: string[];
  above: RankNeighbour | null;
  below: RankNeighbour | null;
}

export interface UnitEvidence {
  layer: string;
  unit: number;
  probes: number;
  /** Whose driver list this is: the stored scores', or the caller's. */
  driverSource: 'scores' | 'request';
  drivers: DriverEvidence[];
  none: ResponseGroup;
  all: ResponseGroup;
  /** The highest-activating probes that carry none of the drivers: what else the unit fires on. */
  noneExamples: EvidenceExample[];
  ranking: RankingReason;
  /** Labels that raise one driver's response only: shown, not counted as concepts (from the scores; [] before the joint model). */
  modulators: { label: string; of: string; auroc: number; q: number | null; effect: number | null }[];
  /** Labels set aside as (nearly) containing a driver in this probe set, so not counted as a second concept. */
  nested: { label: string; within: string; auroc: number }[];
  /** The formulas behind the numbers, as the page states them. */
  formulas: { effect: string; aboveNone: string };
}

export const EVIDENCE_FORMULAS = {
  effect: 'effect = mean activation of the group − mean activation of the probes with none of the drivers',
  aboveNone: 'above none = P(a probe of the group activates the unit more than a probe with none of the drivers), ties count half (Mann–Whitney U / (n_group · n_none))',
};


export function unitEvidence(db: Database.Database, req: Omit<EvidenceRequest, 'study'>, file?: string): UnitEvidence {
  const detail = unitDetail(db, req.layer, req.unit, file);
  const run = readBinding(db) as StudyBinding;
  const layer = findLayer(db, req.layer, file);
  const names = labelNames(db);
  const idOf = new Map(names.map((n, i) => [n, i]));
  const term = (ids: number[]) => ids.map((l) => names[l]).join(' & ');
  // The joint model's driver table, when the scores have one, names compounds and carries the share intervals.
  const joint = readJointExtras(db, layer.id, req.unit);
  const stored = joint.drivers.length === detail.drivers.length
    ? joint.drivers.map((d) => ({ name: term(d.labels), parts: d.labels.map((l) => names[l]), share: d.share, shareLow: d.shareLow, shareHigh: d.shareHigh, sameAs: d.sameAs.map(term) }))
    : detail.drivers.map((d) => ({ name: d.label, parts: [d.label], share: d.share as number | null, shareLow: null as number | null, shareHigh: null as number | null, sameAs: [] as string[] }));
  const chosen = req.drivers
    ? req.drivers.map((parts) => ({ name: parts.join(' & '), parts, share: null as number | null, shareLow: null as number | null, shareHigh: null as number | null, sameAs: [] as string[] }))
    : stored;
  const presence = chosen.map((d, i) => driverPresence(run.probeCount, d.parts.map((label, j) => {
    const id = idOf.get(label);
    if (id === undefined) throw new SkeinError({ code: 'request', file, where: `drivers.${i}.${j}`, message: `No label "${label}" in this study.` });
    return probesOfLabel(db, id);
  })));
  const values = readUnit(db, run, layer.id, req.unit);
  const table = responseTable(values, presence, { examples: req.examples ?? 8 });

  const withArgmax = layer.kind === 'conv' || layer.kind === 'sequence';
  const examplesOf = (probes: number[]): EvidenceExample[] => {
    const locations = withArgmax ? readUnitArgmax(db, run, layer.id, req.unit, probes) : probes.map(() => null);
    const labels = probeLabels(db, probes);
    return probeDisplays(db, probes).map((x, i) => ({ ...x, value: values[x.probe], location: locations[i], labels: labels[i] }));
  };
  const neighbours = rankNeighbours(db, detail.rank);
  const interval = readConceptIntervals(db).get(`${layer.id}:${req.unit}`);
  return {
    layer: layer.name, unit: req.unit, probes: run.probeCount, driverSource: req.drivers ? 'request' : 'scores',
    drivers: chosen.map((d, i) => ({ ...d, ...table.drivers[i], examples: examplesOf(table.drivers[i].examples) })),
    none: table.none, all: table.all, noneExamples: examplesOf(table.noneExamples),
    ranking: {
      rank: detail.rank, total: neighbours.total, conceptCount: detail.conceptCount,
      conceptLow: interval?.low ?? detail.conceptCount, conceptHigh: interval?.high ?? detail.conceptCount,
      evidence: detail.evidence, flags: detail.flags, above: neighbours.above, below: neighbours.below,
    },
    modulators: joint.modulators.map((m) => ({ label: term(m.label), of: term(m.of), auroc: m.auroc, q: m.q, effect: m.effect })),
    nested: joint.nested.map((x) => ({ label: term(x.label), within: term(x.within), auroc: x.auroc })),
    formulas: EVIDENCE_FORMULAS,
  };
}
