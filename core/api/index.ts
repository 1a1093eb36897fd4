/** REST response/request types and /live message types of the Tideline server (types only). */
export * from './rest.ts';
export * from './live.ts';
export * from './audit.ts';
