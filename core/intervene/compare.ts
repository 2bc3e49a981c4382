/** The causal side against the correlational side of one unit, in words. */

export type Agreement = 'agree' | 'partly' | 'disagree-drivers-only' | 'disagree-hurt-only' | 'neither';

export interface Comparison { agreement: Agreement; sentence: string; shared: string[]; driversOnly: string[]; hurtOnly: string[] }

const list = (xs: string[]) => (xs.length <= 1 ? xs.join('') : `${xs.slice(0, -1).join(', ')} and ${xs[xs.length - 1]}`);

/** Compares the labels that drive a unit with the labels its removal hurts. */
export function compareDriversAndCost(drivers: string[], hurt: string[]): Comparison {
  const h = new Set(hurt);
  const d = new Set(drivers);
  const shared = drivers.filter((x) => h.has(x));
  const driversOnly = drivers.filter((x) => !h.has(x));
  const hurtOnly = hurt.filter((x) => !d.has(x));
  let agreement: Agreement;
  let sentence: string;
  if (drivers.length === 0 && hurt.length === 0) {
    agreement = 'neither';
    sentence = 'No label drives this unit and removing it hurts no label measurably: both sides say it can go, on this probe set.';
  } else if (hurt.length === 0) {
    agreement = 'disagree-drivers-only';
    sentence = `They disagree: ${list(drivers)} ${drivers.length > 1 ? 'drive' : 'drives'} this unit, but removing it hurts nothing measurably — the model does not rely on it here, or other units cover for it.`;
  } else if (drivers.length === 0) {
    agreement = 'disagree-hurt-only';
    sentence = `They disagree: no label drives this unit, yet removing it hurts ${list(hurt)} — it matters in a way its activations do not show per label.`;
  } else if (driversOnly.length === 0 && hurtOnly.length === 0) {
    agreement = 'agree';
    sentence = `They agree: ${list(drivers)} ${drivers.length > 1 ? 'drive' : 'drives'} this unit, and removing it hurts exactly ${drivers.length > 1 ? 'those' : 'that'}.`;
  } else if (shared.length > 0) {
    agreement = 'partly';
    sentence = `They partly agree: removing it hurts ${list(shared)}, which ${shared.length > 1 ? 'drive' : 'drives'} it` +
      (hurtOnly.length ? `, and also ${list(hurtOnly)}, which ${hurtOnly.length > 1 ? 'do' : 'does'} not` : '') +
      (driversOnly.length ? `; ${list(driversOnly)} ${driversOnly.length > 1 ? 'drive' : 'drives'} it but ${driversOnly.length > 1 ? 'are' : 'is'} not hurt` : '') + '.';
  } else {
    agreement = 'disagree-hurt-only';
    sentence = `They disagree: ${list(drivers)} ${drivers.length > 1 ? 'drive' : 'drives'} this unit, but removing it hurts ${list(hurt)} instead.`;
  }
  return { agreement, sentence, shared, driversOnly, hurtOnly };
}
