#!/usr/bin/env node
// The skein command: loads the TypeScript sources through tsx (no build step), then runs the CLI.
import { register } from 'tsx/esm/api';

// `skein rank study | head` closes stdout early: that is the reader's choice, not an error.
process.stdout.on('error', (e) => {
  if (e.code === 'EPIPE') process.exit(process.exitCode ?? 0);
  throw e;
});

register();
const { main } = await import('./main.ts');
process.exitCode = await main(process.argv.slice(2));
