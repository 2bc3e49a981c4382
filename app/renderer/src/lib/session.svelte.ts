/**
 * One open study as the screens share it: its summary, the unit table (kept raw: 10^5-row arrays must not become
 * deep reactive proxies) and the unit table's filter, sort and cursor, which survive moving between screens.
 */
import { call, asErrorInfo, type Response, type ErrorInfo } from './api.ts';
import { emptyFilter, defaultSort, allRows, filterRows, sortRows, hurtColumn, type RosterFilter, type RosterSort, type UnitTable } from './table.ts';

export class StudySession {
  readonly path: string;
  summary = $state.raw<Response<'study.summary'> | null>(null);
  table = $state.raw<UnitTable | null>(null);
  error = $state.raw<ErrorInfo | null>(null);
  loading = $state(false);
  filter = $state<RosterFilter>(emptyFilter());
  /** What the "driven by" box shows (a label name once it matches one). */
  driverText = $state('');
  sort = $state<RosterSort>(defaultSort());
  /** Position of the cursor in the visible (filtered, sorted) rows. */
  cursor = $state(0);
  scrollTop = 0;

  /** Per row, unrelated concepts hurt when the unit is removed (NaN: not measured); null until asked. */
  hurt = $state.raw<Float64Array | null>(null);
  /** Every row in the chosen order (re-sorted only when the sort changes). */
  sorted = $derived.by(() => (this.table ? sortRows(this.table, allRows(this.table), $state.snapshot(this.sort), this.hurt) : new Int32Array(0)));
  /** Visible rows: indices into the table's columns, filtered from the sorted order. */
  rows = $derived.by(() => (this.table ? filterRows(this.table, $state.snapshot(this.filter), this.sorted) : new Int32Array(0)));

  /** Shows only the units this label drives (null: every unit). */
  filterByDriver(label: string | null): void {
    const id = label === null || !this.table ? -1 : this.table.labels.indexOf(label);
    this.filter.driver = id >= 0 ? id : null;
    this.driverText = id >= 0 ? label! : '';
    this.cursor = 0;
    this.scrollTop = 0;
  }

  /** The model and probe set of the scan screen this study was opened from (so other screens can send the user back). */
  scanInputs = $state.raw<{ model: string; probes: string } | null>(null);

  /** The study has no scores yet: scanned without scoring, or not written at all (opened on the scan screen). */
  get unscanned(): boolean {
    return this.summary ? !this.summary.scored : this.scanInputs !== null && this.error !== null;
  }

  /** Where "Choose tensors and scan" goes, when known. */
  get scanRoute(): { model: string; probes: string } | null {
    return this.summary ? { model: this.summary.model.path, probes: this.summary.probes.dir } : this.scanInputs;
  }

  constructor(path: string) {
    this.path = path;
  }

  /** Reads the stored removal costs for the roster's "hurt" column (cheap; called when the roster opens). */
  async loadHurt(): Promise<void> {
    const t = this.table;
    if (!t) return;
    try {
      this.hurt = hurtColumn(t, await call('ablate.roster', { study: this.path }));
    } catch {
      this.hurt = null; // the column then reads "—"; the roster itself still works
    }
  }

  /** Loads (or reloads, after a scan) the summary and, when scored, the unit table. */
  async load(): Promise<void> {
    this.loading = true;
    this.error = null;
    try {
      this.summary = await call('study.summary', { study: this.path });
      this.table = this.summary.scored ? await call('units.table', { study: this.path }) : null;
      await this.loadHurt();
    } catch (e) {
      this.error = asErrorInfo(e);
    } finally {
      this.loading = false;
    }
  }
}
