/** The demo build draws from the project's one seeded generator (core/random.ts). */
export * from '../../core/random.ts';
