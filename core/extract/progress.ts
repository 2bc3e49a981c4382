/** Progress of a long job as every screen and the CLI show it: {done, total, etaSeconds}. */
export interface ProgressReport {
  phase: 'extract' | 'score' | 'ablate' | 'geometry' | 'dictionary';
  done: number;
  total: number;
  /** null until there is enough to estimate from. */
  etaSeconds: number | null;
}

/**
 * Counts work done and estimates the time left from the rate of this run's work (work found already done, as on a
 * resume, counts as done but not towards the rate); reports at most ~10 times a second.
 */
export class Progress {
  private done: number;
  private readonly started = Date.now();
  private lastReport = 0;

  constructor(
    private readonly phase: ProgressReport['phase'],
    private readonly total: number,
    private readonly report?: (p: ProgressReport) => void,
    private readonly alreadyDone = 0,
  ) {
    this.done = alreadyDone;
    this.emit(true);
  }

  advance(n: number): void {
    this.done += n;
    this.emit(false);
  }

  finish(): void {
    this.done = this.total;
    this.emit(true);
  }

  private emit(force: boolean): void {
    if (!this.report) return;
    const t = Date.now();
    if (!force && t - this.lastReport < 100) return;
    this.lastReport = t;
    const elapsed = (t - this.started) / 1000;
    const fresh = this.done - this.alreadyDone;
    const etaSeconds = this.done >= this.total ? 0 : fresh > 0 ? (elapsed / fresh) * (this.total - this.done) : null;
    this.report({ phase: this.phase, done: this.done, total: this.total, etaSeconds });
  }
}
