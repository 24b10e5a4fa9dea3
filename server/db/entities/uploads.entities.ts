import { EntitySchema } from 'typeorm';

// Uploaded ratio series (samples in ratio_sample and the raw file in ratio_series_file are read and written with SQL/COPY only).
export interface RatioSeriesRow {
  id: string;
  campaignId: string;
  fileName: string;
  sha256: string;
  byteSize: string;
  rowCount: number;
  validCount: number;
  firstMjd: number;
  lastMjd: number;
  uptimeFraction: number;
  tau0Seconds: number;
  mapping: Record<string, unknown>;
  invented: boolean;
  createdByUserId: string | null;
  createdBy: string;
  createdAt: Date;
}

export const RatioSeriesEntity = new EntitySchema<RatioSeriesRow>({
  name: 'RatioSeries',
  tableName: 'ratio_series',
  columns: {
    id: { type: 'uuid', primary: true },
    campaignId: { name: 'campaign_id', type: 'uuid' },
    fileName: { name: 'file_name', type: 'text' },
    sha256: { type: 'text' },
    byteSize: { name: 'byte_size', type: 'bigint' },
    rowCount: { name: 'row_count', type: 'int' },
    validCount: { name: 'valid_count', type: 'int' },
    firstMjd: { name: 'first_mjd', type: 'float8' },
    lastMjd: { name: 'last_mjd', type: 'float8' },
    uptimeFraction: { name: 'uptime_fraction', type: 'float8' },
    tau0Seconds: { name: 'tau0_seconds', type: 'float8' },
    mapping: { type: 'jsonb' },
    invented: { type: 'boolean', default: false },
    createdByUserId: { name: 'created_by_user_id', type: 'uuid', nullable: true },
    createdBy: { name: 'created_by', type: 'text' },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
  },
});
