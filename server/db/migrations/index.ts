import { Foundation1764650000000 } from './1764650000000-foundation';

// Every migration, in order. Add new ones at the end (file name: <timestamp>-<what>.ts).
export const migrations = [Foundation1764650000000];
