import { EntitySchema } from 'typeorm';
import type { SpeciesCode } from '../../../shared/registry';

export interface MeasuredRatioRow {
  id: string;
  numeratorSpecies: SpeciesCode;
  denominatorSpecies: SpeciesCode;
  value: string;
  relativeUncertainty: number;
  source: string;
  createdAt: Date;
}

export const MeasuredRatioEntity = new EntitySchema<MeasuredRatioRow>({
  name: 'MeasuredRatio',
  tableName: 'measured_frequency_ratio',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    numeratorSpecies: { name: 'numerator_species', type: 'text' },
    denominatorSpecies: { name: 'denominator_species', type: 'text' },
    value: { type: 'text' },
    relativeUncertainty: { name: 'relative_uncertainty', type: 'float8' },
    source: { type: 'text' },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
  },
});
