export * from './types.ts';
export * from './life-cycle.ts';
export * from './chattering.ts';
export * from './alarm-book.ts';
