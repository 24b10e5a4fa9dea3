// Datum offsets as one parameter per height datum relative to a reference datum (not one per ordered pair of
// datums), so that offsets found around three or more datums close by construction: o(A→C) = o(A→B) + o(B→C).
// Model: C expressed in datum d = true C + o_d, with o_reference = 0. A clock comparison sees the true potential
// difference, so for a clock ΔC from a site in datum a to a site in datum b the observation equation is
//   ΔC_clock = (C_b − o_b) − (C_a − o_a)   →   terms −1·o_b and +1·o_a.
// (Observation-equation form: Ghilani, "Adjustment Computations", 6th ed., 2017, ch. 12 with added parameters;
// one offset parameter per datum against a reference is common practice in height-datum unification.)

import type { ParameterTerm } from './gauss-markov';

export const datumOffsetName = (datum: string, reference: string) => `${datum} relative to ${reference}`;

/** Terms of a clock observation from a site in datum `from` to a site in datum `to`; none when both are the same. */
export function datumOffsetTerms(from: string, to: string, reference: string): ParameterTerm[] {
  if (from === to) return [];
  const terms: ParameterTerm[] = [];
  if (to !== reference) terms.push({ name: datumOffsetName(to, reference), coefficient: -1 });
  if (from !== reference) terms.push({ name: datumOffsetName(from, reference), coefficient: 1 });
  return terms;
}
