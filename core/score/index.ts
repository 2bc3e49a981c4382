/** core/score: per-unit statistics and the polysemanticity scores (two passes per layer, then a ranking). */
export * from './types.ts';
export * from './stats.ts';
export { PreparedLabels, prepareLabels } from './labels.ts';
export { explainTopSet } from './explain.ts';
export { Scratch, createScratch, defaultScoreOptions, scoreUnitPartial, validateScoreOptions } from './unit.ts';
export { finishLayer, isDead, isDense, rankUnits } from './layer.ts';
export { UNIT_KINDS, classifyUnit, type UnitKind } from './kind.ts';
export { buildRelatedness, SAME_GROUP_RELATEDNESS, SAME_PARENT_RELATEDNESS, type RelatednessOptions } from './relatedness.ts';
export { WordNet, installedWordNet } from './wordnet.ts';
