import { createHash } from 'node:crypto';
import { HeightDatumEntity, BenchmarkEntity, LevellingSectionEntity, AdjustmentRunEntity } from '../server/db/entities/network.entities';
import { computeRunResult, gatherInputs } from '../server/network/adjustment.service';
import { normalGravityForSection } from '../server/network/network.service';
import { cFromNormalHeight } from '../server/science/normal-gravity';
import { convertPotential, heightMeanMinusZeroTideM } from '../server/science/tides';
import { transform } from '../server/science/geodesy';
import { adjustmentOptionsSchema } from '../shared/network';
import type { Seeder } from './demo';

// Invented levelling network of the demo country: two height datums (a coastal one and a highland one, not joined by
// levelling), a lattice of benchmarks around each lab, a line reaching out from each towards the other, one section with
// a planted +25 mm blunder (line "Dune road", CD-06 → CD-07) for data snooping to find, and one finished adjustment run.
// The lab sites tie to SCL-BM1 and HMO-BM1. Every name and number is made up.

/** Deterministic noise (LCG + Box–Muller) so every demo database is the same. */
function noise(seed: number) {
  let s = seed >>> 0;
  const next = () => ((s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 2 ** 32);
  return () => Math.sqrt(-2 * Math.log(next() + 1e-12)) * Math.cos(2 * Math.PI * next());
}

type Bm = { code: string; name: string; lat: number; lon: number; h: number; fixed?: boolean; known?: boolean; utm?: boolean; destroyed?: boolean };
const QUASIGEOID_M = 39.4; // invented, for ellipsoidal heights only
export const HIGHLAND_DATUM_EXCESS_M = 0.15;

const coastalNames = ['Harbour Light', 'Salt Quay', 'Reed Bank', 'Gull Point', 'Marram Dyke', 'Dune Chapel', 'Tern Meadow', 'Old Sluice', 'Brine Farm', 'Eelgrass Mill', 'Heron Gate', 'Sandpiper Cross'];
const highlandNames = ['Kestrel Pass', 'Granite Saddle', 'Larch Hollow', 'Cairn Top', 'Scree Bridge', 'Pine Terrace', 'Ridge Chapel', 'Fern Shelf', 'Quarry Bend', 'Lynx Col', 'Tarn Steps', 'Eagle Spur'];

function lattice(prefix: string, names: string[], lat0: number, lon0: number, baseH: number, slope: (r: number, c: number) => number): Bm[] {
  const out: Bm[] = [];
  let k = 0;
  for (let r = 0; r < 3; r++) {
    for (let c = 0; c < 4; c++) {
      k++;
      out.push({ code: `${prefix}-${String(k).padStart(2, '0')}`, name: names[k - 1], lat: lat0 - r * 0.04, lon: lon0 + c * 0.07, h: baseH + slope(r, c) });
    }
  }
  return out;
}

export function demoNetwork() {
  const coastal = lattice('CD', coastalNames, 54.27, 10.72, 2.0, (r, c) => 3.1 * r + 1.7 * c + ((r * 7 + c * 3) % 5) * 0.8);
  const highland = lattice('HD', highlandNames, 51.72, 10.22, 470, (r, c) => 38 * r + 21 * c + ((r * 5 + c * 11) % 7) * 4.5);
  coastal[0].fixed = true;
  coastal[0].known = true;
  coastal[11].known = true;
  highland[0].fixed = true;
  highland[0].known = true;
  highland[10].utm = true;
  // Lab benchmarks inside each lattice.
  const sclBm: Bm = { code: 'SCL-BM1', name: 'Saltmarsh laboratory pillar', lat: 54.2, lon: 10.9, h: 6.8, known: true };
  const hmoBm: Bm = { code: 'HMO-BM1', name: 'Highridge observatory pier', lat: 51.6, lon: 10.4, h: 548.2 };
  // Lines reaching towards the other region (each stays in its own datum).
  const coastalLine: Bm[] = [
    { code: 'CD-21', name: 'Moorland Post', lat: 53.98, lon: 10.9, h: 14.5 },
    { code: 'CD-22', name: 'Heath Crossing', lat: 53.86, lon: 10.84, h: 27.9 },
  ];
  const highlandLine: Bm[] = [
    { code: 'HD-21', name: 'Valley Mill', lat: 51.86, lon: 10.4, h: 402.6 },
    { code: 'HD-22', name: 'Foothill Well', lat: 51.98, lon: 10.46, h: 318.3, destroyed: false },
  ];
  const destroyed: Bm = { code: 'CD-30', name: 'Lost Wharf (washed away)', lat: 54.25, lon: 11.12, h: 1.9, destroyed: true };
  const edges = (bms: Bm[]) => {
    const e: [Bm, Bm][] = [];
    for (let r = 0; r < 3; r++) for (let c = 0; c < 4; c++) {
      const i = r * 4 + c;
      if (c < 3) e.push([bms[i], bms[i + 1]]);
      if (r < 2) e.push([bms[i], bms[i + 4]]);
    }
    return e;
  };
  const coastalEdges = edges(coastal);
  const highlandEdges = edges(highland);
  coastalEdges.push([coastal[5], sclBm], [sclBm, coastal[10]], [coastal[9], coastalLine[0]], [coastalLine[0], coastalLine[1]]);
  highlandEdges.push([highland[5], hmoBm], [hmoBm, highland[10]], [highland[1], highlandLine[0]], [highlandLine[0], highlandLine[1]]);
  return { coastal: [...coastal, sclBm, ...coastalLine, destroyed], highland: [...highland, hmoBm, ...highlandLine], coastalEdges, highlandEdges };
}

/** Registered at the end of seeds/demo.ts so it runs after the registry (sites) and can include their ties. */
export const networkSeeder: Seeder = {
  name: 'levelling network',
  run: async ({ manager, userIds }) => {
    const datums = manager.getRepository(HeightDatumEntity);
    const coastalDatum = await datums.save({
      name: 'Coastal Datum 1987', tideSystem: 'zero-tide', realisationEpoch: '1987.5', loopToleranceMmPerSqrtKm: 4, sectionToleranceMmPerSqrtKm: 4,
      notes: 'Invented demo datum. Origin: tide-gauge benchmark CD-01 at Harbour Light. Tolerances: FGCC 1984 first-order values (from memory).',
    });
    const highlandDatum = await datums.save({
      name: 'Highland Datum 2004', tideSystem: 'mean-tide', realisationEpoch: '2004.0', loopToleranceMmPerSqrtKm: 4, sectionToleranceMmPerSqrtKm: 4,
      notes: 'Invented demo datum. Origin: HD-01 at Kestrel Pass. Not connected to the coastal datum by levelling.',
    });
    const net = demoNetwork();
    const repo = manager.getRepository(BenchmarkEntity);
    const rows = new Map<string, Awaited<ReturnType<typeof repo.save>>>();
    for (const [list, datum] of [[net.coastal, coastalDatum], [net.highland, highlandDatum]] as const) {
      for (const b of list) {
        // The highland datum was (in this invented story) realised 0.15 m above the coastal one: its known heights carry
        // that offset, which levelling cannot see (the regions are not joined) but the clocks can.
        // The invented true heights b.h are mean-tide; the coastal datum is zero-tide, so its known values carry the
        // permanent-tide shift (Ekman 1989), which every comparison with clocks (mean-tide) converts back.
        const cMean = cFromNormalHeight(b.h + (datum === highlandDatum ? HIGHLAND_DATUM_EXCESS_M : 0), b.lat);
        const cDatum = datum.tideSystem === 'mean-tide' ? cMean : convertPotential(cMean, b.lat, 'mean-tide', datum.tideSystem);
        const hDatum = b.h + (datum === highlandDatum ? HIGHLAND_DATUM_EXCESS_M : 0) - (datum.tideSystem === 'zero-tide' ? heightMeanMinusZeroTideM(b.lat) : 0);
        // Every known value states its tide system. HD-01's value was (in the story) published in zero-tide, while the
        // highland datum is mean-tide: it is stored as published and converted by every run (a visible conversion).
        const valueSystem = b.code === 'HD-01' ? 'zero-tide' as const : datum.tideSystem;
        const c = valueSystem === datum.tideSystem ? cDatum : convertPotential(cDatum, b.lat, datum.tideSystem, valueSystem);
        const h = b.h + QUASIGEOID_M;
        // One benchmark is entered in UTM zone 32N to show that any supported CRS works; the GRS80 values are derived.
        const [crs, coords] = b.utm ? ['EPSG:25832', utmOf(b.lat, b.lon)] : ['EPSG:4937', [b.lon, b.lat, h]];
        const row = await repo.save({
          code: b.code, name: b.name, datumId: datum.id, crs, coordinatesEntered: coords,
          latitudeDeg: b.lat, longitudeDeg: b.lon, ellipsoidalHeightM: h,
          knownEnteredAs: b.known ? 'H' : null, knownC_m2s2: b.known ? c : null, knownNormalHeightM: b.known ? hDatum - (valueSystem === datum.tideSystem ? 0 : heightMeanMinusZeroTideM(b.lat)) : null,
          knownUncertaintyC_m2s2: b.known ? (b.fixed ? 0 : 0.02) : null, fixed: !!b.fixed, knownTideSystem: b.known ? valueSystem : null,
          monumentation: b.fixed ? 'Bronze bolt in bedrock, protected by a cast-iron cover (invented).' : 'Stainless bolt in a concrete pillar (invented).',
          state: b.destroyed ? 'destroyed' : 'in-use',
        });
        rows.set(b.code, { ...row, datum });
      }
    }
    const gauss = noise(19_870_504);
    const sections = manager.getRepository(LevellingSectionEntity);
    let n = 0;
    for (const [edges, line] of [[net.coastalEdges, 'Coastal'], [net.highlandEdges, 'Highland']] as const) {
      for (const [a, b] of edges) {
        n++;
        const from = rows.get(a.code)!;
        const to = rows.get(b.code)!;
        const dLatKm = (a.lat - b.lat) * 111.2;
        const dLonKm = (a.lon - b.lon) * 111.2 * Math.cos(((a.lat + b.lat) / 2) * (Math.PI / 180));
        // Levelling lines follow roads: ~25 % longer than the straight distance.
        const lengthKm = Math.round(Math.hypot(dLatKm, dLonKm) * 1.25 * 100) / 100;
        const gNormal = normalGravityForSection(from, to);
        const measured = n % 3 !== 0;
        const gMean = measured ? gNormal + 2.1e-4 * Math.sin(n) : gNormal; // invented gravity anomalies of a few 10⁻⁴ m/s²
        const trueDeltaC = cFromNormalHeight(b.h, b.lat) - cFromNormalHeight(a.h, a.lat);
        const sigmaMm = 0.8 * Math.sqrt(lengthKm);
        const blunder = a.code === 'CD-06' && b.code === 'CD-07' ? 0.025 : 0;
        const deltaHeightM = trueDeltaC / gMean + (gauss() * sigmaMm) / 1000 + blunder;
        const withRuns = n % 2 === 0;
        const halfRunMm = (gauss() * sigmaMm) / 2;
        await sections.save({
          lineName: blunder ? 'Dune road' : `${line} ${Math.abs(dLatKm) > Math.abs(dLonKm) ? 'north–south' : 'east–west'} ${Math.ceil(n / 4)}`,
          fromBenchmarkId: from.id, toBenchmarkId: to.id, deltaHeightM: round(deltaHeightM, 5), lengthKm, meanGravity_ms2: round(gMean, 6),
          gravityFromNormal: !measured, observedOn: `20${line === 'Coastal' ? '19' : '21'}-0${1 + (n % 8)}-1${n % 9}`,
          forwardM: withRuns ? round(deltaHeightM + halfRunMm / 1000, 5) : null, backwardM: withRuns ? round(-deltaHeightM + halfRunMm / 1000, 5) : null,
        });
      }
    }
    // One finished run, computed here with the same code the worker uses.
    const options = adjustmentOptionsSchema.parse({ note: 'Demo: levelling only, fixed datum points CD-01 and HD-01.' });
    const inputs = await gatherInputs(manager, options);
    const result = computeRunResult(inputs);
    const at = new Date();
    await manager.getRepository(AdjustmentRunEntity).save({
      state: 'done', progress: 1, stage: 'finished', options: options as never, inputs: inputs as never,
      inputSummary: {
        benchmarks: Object.values(inputs.pointMeta).filter((p) => p.kind === 'benchmark').length,
        sections: inputs.adjustment.observations.filter((o) => o.kind === 'levelling').length,
        ties: inputs.adjustment.observations.filter((o) => o.kind === 'tie').length, clocks: 0, inputSha256: createHash('sha256').update(JSON.stringify(inputs)).digest('hex'),
      },
      result: result as never, sigma0: result.sigma0, degreesOfFreedom: result.degreesOfFreedom, globalTestPassed: result.globalTest?.passed ?? null,
      suspects: result.snooping.suspects.length, createdBy: userIds['ansel.brandt@geopotential-office.invalid'] ?? null, startedAt: at, finishedAt: at,
    });
  },
};

function round(v: number, digits: number) {
  const f = 10 ** digits;
  return Math.round(v * f) / f;
}

/** UTM zone 32N easting/northing of a GRS80 point (through the science core's transform). */
function utmOf(lat: number, lon: number): number[] {
  return transform('EPSG:4937', 'EPSG:25832', [lon, lat]).map((v) => round(v, 3));
}
