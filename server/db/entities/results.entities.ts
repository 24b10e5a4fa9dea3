import { EntitySchema } from 'typeorm';
import type { ResultBody } from '../../../shared/results';

// Comparison results: one row per computation (kept as history); the newest row of a campaign is its current result
// when its input hash still matches the campaign's inputs.

export interface ComparisonResultRow {
  id: string;
  campaignId: string;
  inputHash: string;
  constants: Record<string, unknown>;
  softwareVersion: string;
  computedAt: Date;
  computedBy: string;
  result: ResultBody;
}

export const ComparisonResultEntity = new EntitySchema<ComparisonResultRow>({
  name: 'ComparisonResult',
  tableName: 'comparison_result',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    campaignId: { name: 'campaign_id', type: 'uuid' },
    inputHash: { name: 'input_hash', type: 'text' },
    constants: { type: 'jsonb' },
    softwareVersion: { name: 'software_version', type: 'text' },
    computedAt: { name: 'computed_at', type: 'timestamptz' },
    computedBy: { name: 'computed_by', type: 'text' },
    result: { type: 'jsonb' },
  },
});

export const resultsEntities = [ComparisonResultEntity];
