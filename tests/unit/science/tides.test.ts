import { describe, expect, it } from 'vitest';
import { normalGravityOnEllipsoid } from '../../../server/science/normal-gravity';
import { geodeticToGeocentric } from '../../../server/science/geodesy';
import {
  bodyPositionsEarthFixed,
  convertPotentialDifference,
  degree2Potential,
  GM_MOON_M3_PER_S2,
  GM_SUN_M3_PER_S2,
  heightMeanMinusTideFreeM,
  heightMeanMinusZeroTideM,
  permanentTidePotential,
  tidePotentialAt,
  TideBodyCache,
  tidePotentialSeries,
  type Vec3,
} from '../../../server/science/tides';

const norm = (v: Vec3): number => Math.hypot(v[0], v[1], v[2]);
const mjdOf = (iso: string): number => Date.parse(iso) / 86_400_000 + 40_587;

describe('body positions (astronomy-engine, rotated to Earth-fixed)', () => {
  it('distances lie in the known ranges (Moon 356 000–407 000 km, Sun 147.1–152.1 million km; from memory)', () => {
    for (let d = 0; d < 400; d += 9.7) {
      const p = bodyPositionsEarthFixed(60_000 + d);
      expect(norm(p.moonM) / 1e3).toBeGreaterThan(356_000);
      expect(norm(p.moonM) / 1e3).toBeLessThan(407_000);
      expect(norm(p.sunM) / 1e9).toBeGreaterThan(147.0);
      expect(norm(p.sunM) / 1e9).toBeLessThan(152.2);
    }
  });

  it('solar declination at the 2024 solstice/equinox and the subsolar longitude at noon UTC (almanac facts, from memory)', () => {
    const solstice = bodyPositionsEarthFixed(new Date('2024-06-20T20:51:00Z')).sunM;
    expect((Math.asin(solstice[2] / norm(solstice)) * 180) / Math.PI).toBeCloseTo(23.44, 1);
    const equinox = bodyPositionsEarthFixed(new Date('2024-03-20T03:06:00Z')).sunM;
    expect(Math.abs((Math.asin(equinox[2] / norm(equinox)) * 180) / Math.PI)).toBeLessThan(0.01);
    // At 12:00 UTC the Sun stands over longitude −(equation of time), within ±4.5° all year.
    for (const date of ['2024-02-11', '2024-05-14', '2024-07-26', '2024-11-03']) {
      const s = bodyPositionsEarthFixed(new Date(`${date}T12:00:00Z`)).sunM;
      expect(Math.abs((Math.atan2(s[1], s[0]) * 180) / Math.PI)).toBeLessThan(4.5);
    }
  });
});

describe('degree-2 tidal potential', () => {
  it('equals the exact potential GM/|R−r| − GM/R − GM r·R/R³ up to the degree-3 remainder (Legendre expansion)', () => {
    const siteP = geodeticToGeocentric(52.3, 7.4, 100);
    const site: Vec3 = [siteP.x, siteP.y, siteP.z];
    const r = norm(site);
    for (let d = 0; d < 30; d += 0.37) {
      const p = bodyPositionsEarthFixed(60_300 + d);
      for (const [gm, body] of [[GM_MOON_M3_PER_S2, p.moonM], [GM_SUN_M3_PER_S2, p.sunM]] as const) {
        const R = norm(body);
        const diff: Vec3 = [body[0] - site[0], body[1] - site[1], body[2] - site[2]];
        const dot = site[0] * body[0] + site[1] * body[1] + site[2] * body[2];
        const exact = gm / norm(diff) - gm / R - (gm * dot) / R ** 3;
        const w2 = degree2Potential(gm, site, body);
        const remainderBound = (gm * r ** 3) / R ** 4 / (1 - r / R);
        expect(Math.abs(exact - w2)).toBeLessThanOrEqual(remainderBound);
      }
    }
    // The lunar degree-3 bound is ~1.7 % of the degree-2 scale, so the check is not vacuous.
    expect((GM_MOON_M3_PER_S2 * r ** 3) / 384_400e3 ** 4 / ((GM_MOON_M3_PER_S2 * r ** 2) / 384_400e3 ** 3)).toBeLessThan(0.02);
  });

  it('stays within the published size: periodic clock potential up to about 3 m²/s² (Voigt, Denker & Timmen 2016, Metrologia 53:1365)', () => {
    const hourly = Float64Array.from({ length: 24 * 60 }, (_, i) => 60_400 + i / 24);
    for (const lat of [0, 30, 52.3, 70]) {
      const v = tidePotentialSeries({ latitudeDeg: lat, longitudeDeg: 7 }, hourly, { removePermanent: true });
      const maxAbs = v.reduce((m, x) => Math.max(m, Math.abs(x)), 0);
      expect(maxAbs).toBeLessThan(3.5);
      expect(maxAbs).toBeGreaterThan(0.5);
    }
  });

  it('time average over a lunar nodal period equals the conventional permanent tide (Ekman 1989, Bull. Géod. 63:281)', () => {
    const site = { latitudeDeg: 52.3, longitudeDeg: 7.4 };
    const count = 6000;
    const golden = (Math.sqrt(5) - 1) / 2;
    let sum = 0;
    for (let i = 0; i < count; i++) sum += tidePotentialAt(site, 51_544.5 + ((i * golden) % 1) * 6798.4).direct_m2s2;
    // Sampling noise ≈ 1 m²/s²/√6000 ≈ 0.013 m²/s².
    expect(sum / count).toBeCloseTo(permanentTidePotential(52.3), 1);
    expect(Math.abs(sum / count - permanentTidePotential(52.3))).toBeLessThan(0.05);
  });

  it('series interpolation agrees with direct evaluation to 1e-8 m²/s² (method bound stated in tides.ts)', () => {
    const site = { latitudeDeg: -33.9, longitudeDeg: 151.2, ellipsoidalHeightM: 50 };
    const epochs = Float64Array.from({ length: 20_000 }, (_, i) => 60_123.4 + i * (30 / 86_400) + 1e-6 * Math.sin(i));
    const series = tidePotentialSeries(site, epochs, { removePermanent: true });
    for (let i = 0; i < epochs.length; i += 97) {
      expect(Math.abs(series[i] - tidePotentialAt(site, epochs[i], { removePermanent: true }).clock_m2s2)).toBeLessThan(1e-8);
    }
  });

  it('dense 1 s series (potential on a 30 s grid, then a cubic in time) agree with direct evaluation to 1e-8 m²/s² (method bound stated in tides.ts)', () => {
    const site = { latitudeDeg: 47.1, longitudeDeg: -3.6, ellipsoidalHeightM: 210 };
    // Two days of 1 s epochs with the millisecond jitter of real time stamps, plus one unsorted epoch at the end.
    const epochs = Float64Array.from({ length: 172_800 }, (_, i) => 60_700.25 + (i + 1e-3 * Math.sin(i)) / 86_400);
    epochs[epochs.length - 1] = 60_700.5;
    const series = tidePotentialSeries(site, epochs, { removePermanent: true });
    let checked = 0;
    for (let i = 0; i < epochs.length; i += 331) {
      expect(Math.abs(series[i] - tidePotentialAt(site, epochs[i], { removePermanent: true }).clock_m2s2)).toBeLessThan(1e-8);
      checked++;
    }
    const lastI = epochs.length - 1;
    expect(Math.abs(series[lastI] - tidePotentialAt(site, epochs[lastI], { removePermanent: true }).clock_m2s2)).toBeLessThan(1e-8);
    expect(Math.abs(series[0] - tidePotentialAt(site, epochs[0], { removePermanent: true }).clock_m2s2)).toBeLessThan(1e-8);
    expect(checked).toBeGreaterThan(500);
    // The potential does move over the two days (the check is not vacuous).
    expect(series.reduce((m, v) => Math.max(m, v), -Infinity) - series.reduce((m, v) => Math.min(m, v), Infinity)).toBeGreaterThan(0.5);
  });

  it('scales the direct potential by 1 + k2 − h2 = 0.68745 (IERS 2010 Table 6.3 elastic k20 and §7.1.1 h2) and signs y = −δW/c²', () => {
    const t = tidePotentialAt({ latitudeDeg: 0, longitudeDeg: 0 }, mjdOf('2025-03-14T06:00:00Z'));
    expect(t.clock_m2s2 / t.direct_m2s2).toBeCloseTo(0.68745, 12);
    expect(t.fractionalFrequency).toBeCloseTo(-t.clock_m2s2 / 299_792_458 ** 2, 30);
    const anelastic = tidePotentialAt({ latitudeDeg: 0, longitudeDeg: 0 }, mjdOf('2025-03-14T06:00:00Z'), { k2: 0.3019 });
    expect(anelastic.clock_m2s2 / anelastic.direct_m2s2).toBeCloseTo(0.6941, 12);
  });
});

describe('permanent tide (Ekman 1989; IERS Conventions 2010 §7.1.1.2)', () => {
  it('height differences between tide systems at 52.3° (Ekman 1989; Mäkinen & Ihde 2009, from memory)', () => {
    expect(heightMeanMinusZeroTideM(52.3) * 100).toBeCloseTo(8.63, 2);
    expect(heightMeanMinusTideFreeM(52.3) * 100).toBeCloseTo(5.87, 2);
  });

  it('permanent potential: +0.97 (equator), −0.85 (52.3°), −1.93 m²/s² (pole)', () => {
    expect(permanentTidePotential(0)).toBeCloseTo(0.97, 2);
    expect(permanentTidePotential(52.3)).toBeCloseTo(-0.85, 2);
    // Ekman's formula at the pole: γp·(0.099 − 0.296) m = −1.937 m²/s², quoted as "about −1.93", so allow the rounding.
    expect(Math.abs(permanentTidePotential(90) + 1.93)).toBeLessThan(0.01);
  });

  it('converts potential differences consistently with the height offsets (C_MT − C_ZT = −W_perm)', () => {
    const dc = 5000;
    const zt = convertPotentialDifference(dc, 0, 52.3, 'mean-tide', 'zero-tide');
    expect(zt - dc).toBeCloseTo(permanentTidePotential(52.3) - permanentTidePotential(0), 12);
    expect(convertPotentialDifference(zt, 0, 52.3, 'zero-tide', 'mean-tide')).toBeCloseTo(dc, 10);
    const tf = convertPotentialDifference(dc, 0, 52.3, 'mean-tide', 'tide-free');
    expect(convertPotentialDifference(tf, 0, 52.3, 'tide-free', 'zero-tide')).toBeCloseTo(zt, 10);
    expect(convertPotentialDifference(dc, 45, 45, 'mean-tide', 'tide-free')).toBe(dc);
    // C_MT − C_ZT at one point over γ is the height offset H_MT − H_ZT.
    for (const lat of [0, 30, 52.3, 80]) {
      // ΔC from 45° to lat converted ZT → MT is (C_MT − C_ZT)(lat) − (C_MT − C_ZT)(45°); add back the 45° term.
      const atLat = convertPotentialDifference(0, 45, lat, 'zero-tide', 'mean-tide') - permanentTidePotential(45);
      expect(atLat / normalGravityOnEllipsoid(lat)).toBeCloseTo(heightMeanMinusZeroTideM(lat), 3);
    }
  });
});

describe('body positions shared between the sites of one series', () => {
  it('leave both series bit-identical to their own computation, and the second site computes no node again', () => {
    const a = { latitudeDeg: 45.2, longitudeDeg: 10.1, ellipsoidalHeightM: 50 };
    const b = { latitudeDeg: 46.7, longitudeDeg: 8.3, ellipsoidalHeightM: 900 };
    // dense (1 s for 2 days: the 30 s potential grid) and sparse (every 7 min for 5 days: the 10 min body grid)
    const dense = Float64Array.from({ length: 2 * 86_400 }, (_, i) => 61_100 + i / 86_400);
    const sparse = Float64Array.from({ length: 5 * 206 }, (_, i) => 61_300 + (i * 7) / 1440);
    for (const epochs of [dense, sparse]) {
      const bodies = new TideBodyCache();
      const sharedA = tidePotentialSeries(a, epochs, { removePermanent: true, bodies });
      const nodes = bodies.nodes.size;
      expect(nodes).toBeGreaterThan(100);
      const sharedB = tidePotentialSeries(b, epochs, { removePermanent: true, bodies });
      expect(bodies.nodes.size).toBe(nodes);
      expect(Array.from(sharedA)).toEqual(Array.from(tidePotentialSeries(a, epochs, { removePermanent: true })));
      expect(Array.from(sharedB)).toEqual(Array.from(tidePotentialSeries(b, epochs, { removePermanent: true })));
    }
  });
});
