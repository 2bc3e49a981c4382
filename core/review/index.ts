/** Team review: tags, notes, statuses and their history per unit; bundles, merging, the meeting report. */
export * from './vocabulary.ts';
export * from './merge.ts';
export * from './store.ts';
export * from './filter.ts';
export * from './bundle.ts';
export * from './import.ts';
export * from './note.ts';
export * from './prefs.ts';
export * from './report.ts';
export { readJsonStrict, JsonReadError } from './json.ts';
