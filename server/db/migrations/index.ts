import { Foundation1764650000000 } from './1764650000000-foundation';
import { Registry1764660000000 } from './1764660000000-registry';
import { RatioSeries1764670000000 } from './1764670000000-ratio-series';
import { Results1764680000000 } from './1764680000000-results';
import { Network1764690000000 } from './1764690000000-network';
import { Certificates1764700000000 } from './1764700000000-certificates';
import { RateLimit1765000000000 } from './1765000000000-rate-limit';
import { ResultRequests1765000000001 } from './1765000000001-result-requests';
import { SessionsAccounts1765100000000 } from './1765100000000-sessions-accounts';
import { RateLimit1765200000000 } from './1765200000000-rate-limit';
import { AuditChainV21765300000000 } from './1765300000000-audit-chain-v2';
import { MailOutboxRetry1765310000000 } from './1765310000000-mail-outbox-retry';
import { TideSystems1765400000000 } from './1765400000000-tide-systems';
import { MeasuredRatios1765500000000 } from './1765500000000-measured-ratios';
import { SigningChain1765600000000 } from './1765600000000-signing-chain';
import { ReviewDesk1765700000000 } from './1765700000000-review-desk';
import { ListIndexes1765800000000 } from './1765800000000-list-indexes';
import { SamplePartitions1765800001000 } from './1765800001000-sample-partitions';
import { UploadProgress1765800002000 } from './1765800002000-upload-progress';
import { TransportableClocks1766000000000 } from './1766000000000-transportable-clocks';
import { ReadAfterWrite1766000900000 } from './1766000900000-read-after-write';
import { RatioClosures1766030000000 } from './1766030000000-ratio-closures';
import { SiteTiePotential1766050000000 } from './1766050000000-site-tie-potential';
import { JobsProgress1766080000000 } from './1766080000000-jobs-progress';
import { ChainCertificates1766100000000 } from './1766100000000-chain-certificates';
import { CampaignListScope1766110000000 } from './1766110000000-campaign-list-scope';
import { SeriesOverviewCoarse1766130000000 } from './1766130000000-series-overview-coarse';
import { RawFileLz41766140000000 } from './1766140000000-raw-file-lz4';
import { TokenChangeNotify1766150000000 } from './1766150000000-token-change-notify';
import { CampaignTally1766160000000 } from './1766160000000-campaign-tally';
import { RawFileApart1766170000000 } from './1766170000000-raw-file-apart';

// Every migration, in order. Add new ones at the end (file name: <timestamp>-<what>.ts).
export const migrations = [
  Foundation1764650000000,
  Registry1764660000000,
  RatioSeries1764670000000,
  Results1764680000000,
  Network1764690000000,
  Certificates1764700000000,
  RateLimit1765000000000,
  ResultRequests1765000000001,
  SessionsAccounts1765100000000,
  RateLimit1765200000000,
  AuditChainV21765300000000,
  MailOutboxRetry1765310000000,
  TideSystems1765400000000,
  MeasuredRatios1765500000000,
  SigningChain1765600000000,
  ReviewDesk1765700000000,
  ListIndexes1765800000000,
  SamplePartitions1765800001000,
  UploadProgress1765800002000,
  TransportableClocks1766000000000,
  ReadAfterWrite1766000900000,
  RatioClosures1766030000000,
  SiteTiePotential1766050000000,
  JobsProgress1766080000000,
  ChainCertificates1766100000000,
  CampaignListScope1766110000000,
  SeriesOverviewCoarse1766130000000,
  RawFileLz41766140000000,
  TokenChangeNotify1766150000000,
  CampaignTally1766160000000,
  RawFileApart1766170000000,
];
