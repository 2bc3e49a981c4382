/**
 * Where the user is, kept in the URL hash so a reload (or a bookmark) returns to the same screen and study:
 * "#/roster?study=/data/demo.study".
 */
export type Route =
  | { screen: 'desk' }
  | { screen: 'capture'; study: string; model: string; probes: string; job?: string }
  | { screen: 'roster'; study: string }
  | { screen: 'profile'; study: string; layer: string; unit: number }
  | { screen: 'reach'; study: string; label?: string }
  | { screen: 'strata'; study: string }
  | { screen: 'toll'; study: string; layer?: string }
  | { screen: 'lens'; study: string; layer?: string }
  | { screen: 'merge'; study: string };

export type Screen = Route['screen'];

export function parseRoute(hash: string): Route {
  const body = hash.replace(/^#\/?/, '');
  const q = body.indexOf('?');
  const screen = q < 0 ? body : body.slice(0, q);
  const params = new URLSearchParams(q < 0 ? '' : body.slice(q + 1));
  const study = params.get('study');
  switch (screen) {
    case 'capture': {
      const model = params.get('model');
      const probes = params.get('probes');
      if (study && model && probes) return { screen, study, model, probes, ...(params.get('job') ? { job: params.get('job')! } : {}) };
      break;
    }
    case 'roster':
    case 'strata':
    case 'merge':
      if (study) return { screen, study };
      break;
    case 'profile': {
      const layer = params.get('layer');
      const unit = Number(params.get('unit'));
      if (study && layer !== null && Number.isInteger(unit) && unit >= 0 && params.get('unit') !== '') return { screen, study, layer, unit };
      break;
    }
    case 'lens':
      if (study) return params.get('layer') ? { screen, study, layer: params.get('layer')! } : { screen, study };
      break;
    case 'reach':
      if (study) return params.get('label') ? { screen, study, label: params.get('label')! } : { screen, study };
      break;
    case 'toll':
      if (study) return params.get('layer') ? { screen, study, layer: params.get('layer')! } : { screen, study };
      break;
  }
  return { screen: 'desk' };
}

export function routeHash(r: Route): string {
  const { screen, ...rest } = r;
  const params = new URLSearchParams();
  for (const [k, v] of Object.entries(rest)) if (v !== undefined) params.set(k, String(v));
  const qs = params.toString();
  return `#/${screen}${qs ? `?${qs}` : ''}`;
}

/** The study a route is about, if any. */
export function routeStudy(r: Route): string | null {
  return 'study' in r ? r.study : null;
}
