import { Foundation1764650000000 } from './1764650000000-foundation';
import { Certificates1764700000000 } from './1764700000000-certificates';
import { Registry1764660000000 } from './1764660000000-registry';
import { Network1764690000000 } from './1764690000000-network';
import { RatioSeries1764670000000 } from './1764670000000-ratio-series';
import { Results1764680000000 } from './1764680000000-results';
import { ReviewDesk1765700000000 } from './1765700000000-review-desk';

// Every migration, in order. Add new ones at the end (file name: <timestamp>-<what>.ts).
export const migrations = [Foundation1764650000000, Registry1764660000000, RatioSeries1764670000000, Results1764680000000, Network1764690000000, Certificates1764700000000, ReviewDesk1765700000000];
