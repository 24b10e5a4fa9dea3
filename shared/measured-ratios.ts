import { z } from 'zod';
import { decimalString, speciesSchema } from './registry';

// Directly measured optical frequency ratios ν(numerator)/ν(denominator) with their published source, kept as
// reference data. A campaign uses one only when its lab chooses it; none ever becomes a default.

export const measuredRatioInput = z
  .object({
    numeratorSpecies: speciesSchema,
    denominatorSpecies: speciesSchema,
    /** The ratio as published, a decimal string (float64 would drop the 17th digit onwards). */
    value: decimalString(40),
    relativeUncertainty: z.number().refine((v) => Number.isFinite(v) && v > 0 && v < 1e-6, 'a relative standard uncertainty above 0 and far below 1e-6'),
    /** The published measurement: authors, journal, year, DOI. */
    source: z.string().trim().min(10, 'name the publication (authors, journal, year)').max(1000),
  })
  .refine((r) => r.numeratorSpecies !== r.denominatorSpecies, { path: ['denominatorSpecies'], message: 'a ratio needs two different species' });
export type MeasuredRatioInput = z.input<typeof measuredRatioInput>;

export const measuredRatioSchema = z.object({
  id: z.string().uuid(),
  numeratorSpecies: speciesSchema,
  denominatorSpecies: speciesSchema,
  label: z.string(),
  value: z.string(),
  relativeUncertainty: z.number(),
  source: z.string(),
  createdAt: z.string(),
});
export type MeasuredRatio = z.infer<typeof measuredRatioSchema>;

/** A campaign's choice of a registered measured ratio in place of the default (ν_B/ν_A, inverted if registered as ν_A/ν_B). */
export const measuredRatioChoice = z.object({
  measuredRatioId: z.string().uuid(),
  justification: z.string().trim().min(10, 'explain in at least 10 characters why the measured ratio is used').max(2000),
});
export type MeasuredRatioChoice = z.infer<typeof measuredRatioChoice>;
