/** The superposition lens: concept directions, decodability, interference, feature dimensionality, localisation. */
export * from './stats.ts';
export * from './probe.ts';
export * from './lens.ts';
export { createKernels, type Kernels } from './kernels.ts';
export * from './job.ts';
