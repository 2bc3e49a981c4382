// Engine entry (Electron utilityProcess, or `node` under test). CommonJS with a dynamic import, so it loads whether or
// not the process accepts an ES module as entry; tsx is registered first so the TypeScript sources run as they are,
// the same way the skein CLI does (core/cli/bin.js).
(async () => {
  const { register } = await import('tsx/esm/api');
  register();
  const { startEngine } = await import('./api-host.ts');
  startEngine();
})().catch((e) => {
  process.stderr.write(`Skein engine failed to start: ${e && e.stack ? e.stack : e}\n`);
  process.exit(1);
});
