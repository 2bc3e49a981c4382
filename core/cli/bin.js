#!/usr/bin/env node
// The skein command: loads the TypeScript sources through tsx (no build step), then runs the CLI.
import { register } from 'tsx/esm/api';

register();
const { main } = await import('./main.ts');
process.exitCode = await main(process.argv.slice(2));
