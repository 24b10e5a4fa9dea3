// Normalised error E_n = (x1 − x2) / √(U1² + U2²) with expanded uncertainties (k = 2 normally);
// |E_n| ≤ 1 is satisfactory. ISO 13528:2015 §9.7 and ISO/IEC 17043:2010 Annex B (clause numbers from memory).

import { ScienceInputError } from './errors';

export interface AgreementResult {
  en: number;
  agreed: boolean;
  difference: number;
  combinedExpandedUncertainty: number;
}

export function normalisedError(x1: number, expandedU1: number, x2: number, expandedU2: number): AgreementResult {
  for (const [field, v] of [['x1', x1], ['x2', x2], ['expandedU1', expandedU1], ['expandedU2', expandedU2]] as const) {
    if (!Number.isFinite(v)) throw new ScienceInputError(field, 'must be a finite number');
  }
  if (expandedU1 < 0) throw new ScienceInputError('expandedU1', 'must not be negative');
  if (expandedU2 < 0) throw new ScienceInputError('expandedU2', 'must not be negative');
  const combined = Math.hypot(expandedU1, expandedU2);
  // E_n is undefined without any uncertainty; refusing beats reporting ±Infinity as a verdict.
  if (combined === 0) throw new ScienceInputError('expandedU1', 'both expanded uncertainties are zero; E_n is undefined');
  const difference = x1 - x2;
  const en = difference / combined;
  return { en, agreed: Math.abs(en) <= 1, difference, combinedExpandedUncertainty: combined };
}
