import { describe, expect, it } from 'vitest';
import { registeredHeightDifference, normalHeightIn, TideSystemNotStated, type RegisteredSiteHeight } from '../../../server/science/registered-heights';
import { convertPotential, heightMeanMinusTideFreeM, heightMeanMinusZeroTideM, potentialShiftFromMeanTide } from '../../../server/science/tides';

const site = (over: Partial<RegisteredSiteHeight> = {}): RegisteredSiteHeight => ({
  latitudeDeg: 54, ellipsoidalHeightM: 100, ellipsoidalHeightUncertaintyM: 0.01, ellipsoidalCrustSystem: 'mean-tide',
  quasigeoidHeightM: 40, quasigeoidUncertaintyM: 0.03, quasigeoidTideSystem: 'mean-tide', quasigeoidGridId: 'g1', ...over,
});
// δ(φ) = 0.099 − 0.296 sin²φ m: Ekman 1989 (Bull. Géod. 63), the permanent tide in heights; at 54°: −0.094 718 m.
const delta54 = 0.099 - 0.296 * Math.sin((54 * Math.PI) / 180) ** 2;

describe('tide-system conversions of heights and potentials', () => {
  it('normal heights: H_mean − H_zero = −δ (Ekman 1989), H_mean − H_tide-free = −(1 + k − h)·δ with k = 0.30, h = 0.62 (Mäkinen & Ihde 2009)', () => {
    const mean = normalHeightIn(site(), 'mean-tide').heightM;
    const zero = normalHeightIn(site(), 'zero-tide').heightM;
    const free = normalHeightIn(site(), 'tide-free').heightM;
    expect(mean - zero).toBeCloseTo(-delta54, 12);
    expect(mean - free).toBeCloseTo(-0.68 * delta54, 12);
    // and the same as the height functions the results use
    expect(mean - zero).toBeCloseTo(heightMeanMinusZeroTideM(54), 12);
    expect(mean - free).toBeCloseTo(heightMeanMinusTideFreeM(54), 12);
  });

  it('GNSS (tide-free crust) + zero-tide ζ → mean-tide H = h_TF + h·δ − (ζ_Z + δ) (Mäkinen & Ihde 2009)', () => {
    const s = site({ ellipsoidalCrustSystem: 'tide-free', quasigeoidTideSystem: 'zero-tide' });
    expect(normalHeightIn(s, 'mean-tide').heightM).toBeCloseTo(100 + 0.62 * delta54 - (40 + delta54), 12);
  });

  it('a geopotential number moves by γ0·δ from mean- to zero-tide and back exactly (Ekman 1989)', () => {
    const c = 5000;
    const zero = convertPotential(c, 54, 'mean-tide', 'zero-tide');
    expect(zero - c).toBeCloseTo(potentialShiftFromMeanTide('zero-tide', 54), 12);
    // γ0 at 54° by Somigliana with GRS80 (Moritz 2000): 9.81448… m/s²
    expect((zero - c) / delta54).toBeCloseTo(9.8145, 3);
    expect(convertPotential(zero, 54, 'zero-tide', 'mean-tide')).toBeCloseTo(c, 12);
  });

  it('a missing tide system is refused, never assumed', () => {
    expect(() => registeredHeightDifference(site({ quasigeoidTideSystem: null }), site(), 10, 'mean-tide')).toThrow(TideSystemNotStated);
    expect(() => normalHeightIn(site({ ellipsoidalCrustSystem: null }), 'mean-tide')).toThrow(/crust system/);
  });
});

describe('correlation model of registered height differences (JCGM 100:2008 eq. 13)', () => {
  it('ζ from one grid at distance d: ρ = exp(−d/L), L = 100 km by default', () => {
    const r = registeredHeightDifference(site(), site({ latitudeDeg: 54.1 }), 50, 'mean-tide');
    const rho = Math.exp(-0.5);
    expect(r.rhoQuasigeoid).toBeCloseTo(rho, 12);
    expect(r.standardUncertaintyM).toBeCloseTo(Math.sqrt(2 * 0.01 ** 2 + 2 * 0.03 ** 2 - 2 * rho * 0.03 * 0.03), 12);
    expect(r.standardUncertaintyIndependentM).toBeCloseTo(Math.sqrt(2 * 0.01 ** 2 + 2 * 0.03 ** 2), 12);
    expect(r.statement).toContain('L = 100 km (default)');
  });
  it('ζ from different sources: independent; a grid’s own correlation length is used when stated', () => {
    const indep = registeredHeightDifference(site({ quasigeoidGridId: null }), site({ quasigeoidGridId: null }), 50, 'mean-tide');
    expect(indep.rhoQuasigeoid).toBe(0);
    const long = registeredHeightDifference(site({ quasigeoidCorrelationLengthKm: 500 }), site(), 50, 'mean-tide');
    expect(long.rhoQuasigeoid).toBeCloseTo(Math.exp(-0.1), 12);
  });
});
