// Worker-thread entry for the stability calculator (run by piscina, server/calc/stability-pool.ts). Loads the pure
// science module through tsx, computes, and returns either the points or the science module's input error as data
// (an Error's class does not survive the thread boundary).
import { register } from 'tsx/esm/api';

register();
const { stabilityAnalysis } = await import('../science/stability.ts');
const { ScienceInputError } = await import('../science/errors.ts');

export default function analyse(input) {
  try {
    return { ok: true, points: stabilityAnalysis(input) };
  } catch (e) {
    if (e instanceof ScienceInputError) return { ok: false, field: e.field, message: e.message };
    throw e;
  }
}
