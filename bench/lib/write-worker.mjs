// Worker entry: loads the TypeScript worker through tsx (worker threads do not inherit the parent's loader).
import { register } from 'tsx/esm/api';

register();
await import('./write-worker.ts');
