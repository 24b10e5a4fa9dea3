import { Readable } from 'node:stream';
import type pg from 'pg';
import { recordAudit } from '../server/audit/audit.service';
import { C2_M2_PER_S2 } from '../server/science/constants';
import { meanNormalGravity } from '../server/science/normal-gravity';
import { tidePotentialSeries, type TideSite } from '../server/science/tides';
import { loadCampaignForUpload, storeSeries } from '../server/uploads/uploads.service';
import type { Seeder } from './demo';
import { TRANSPORT_OFFSETS } from './transport.seed';

// INVENTED demo ratio series for the seeded campaigns that are past the draft stage: 10 s spacing, white frequency
// noise of 3e-16/√τ, the gravitational redshift of the invented height difference between the two clocks' sites
// (y = γ̄·ΔH/c², B above A gives y > 0, as in server/science/redshift.ts), the periodic solid-Earth tide that
// real clocks on the two sites would see (y_tide = −δW/c², server/science/tides.ts), a few invalid flags and one gap.
// Stored through the same code path as uploads (storeSeries), so each keeps its generated CSV and SHA-256.

const SAMPLES = 6000;
const TAU0_S = 10;
const SIGMA_Y_1S = 3e-16;

/** Park–Miller minimal standard generator: seeded, repeatable. */
function rng(seed: number) {
  let s = seed % 2147483647 || 1;
  return () => (s = (s * 16807) % 2147483647) / 2147483647;
}

export function inventedSeriesCsv(opts: {
  startMjd: number; yGrav: number; asRatio: boolean; seed: number; label: string; sites?: { a: TideSite; b: TideSite };
}): string {
  const rnd = rng(opts.seed);
  const gapStart = Math.floor(SAMPLES * 0.55);
  const gapLength = 360; // one hour without data
  const invalid = new Set([Math.floor(SAMPLES * 0.1), Math.floor(SAMPLES * 0.3), Math.floor(SAMPLES * 0.3) + 1, Math.floor(SAMPLES * 0.8)]);
  const sigma = SIGMA_Y_1S / Math.sqrt(TAU0_S);
  const epochs = Float64Array.from({ length: SAMPLES }, (_, i) => opts.startMjd + (i * TAU0_S) / 86_400);
  const wA = opts.sites ? tidePotentialSeries(opts.sites.a, epochs, { removePermanent: true }) : null;
  const wB = opts.sites ? tidePotentialSeries(opts.sites.b, epochs, { removePermanent: true }) : null;
  const lines = [`# INVENTED demo series (${opts.label}); not a measurement`, opts.asRatio ? 'mjd,ratio,flag' : 'mjd,offset,flag'];
  for (let i = 0; i < SAMPLES; i++) {
    if (i >= gapStart && i < gapStart + gapLength) continue;
    const g = Math.sqrt(-2 * Math.log(rnd())) * Math.cos(2 * Math.PI * rnd());
    const yTide = wA && wB ? -(wB[i] - wA[i]) / C2_M2_PER_S2 : 0;
    const y = opts.yGrav + yTide + sigma * g;
    const mjd = (opts.startMjd + (i * TAU0_S) / 86_400).toFixed(8);
    let value: string;
    if (opts.asRatio) {
      // reference ratio 1: write 1 + y with 20 decimals (21 significant digits)
      const units = BigInt(Math.round(y * 1e20));
      value = units >= 0n ? `1.${units.toString().padStart(20, '0')}` : `0.${(10n ** 20n + units).toString().padStart(20, '0')}`;
    } else {
      value = y.toExponential(6);
    }
    lines.push(`${mjd},${value},${invalid.has(i) ? 'invalid' : 'valid'}`);
  }
  return `${lines.join('\n')}\n`;
}

export const uploadsSeeder: Seeder = {
  name: 'ratio series (invented)',
  run: async ({ manager }) => {
    const client = (manager.queryRunner as unknown as { databaseConnection: pg.PoolClient }).databaseConnection;
    const campaigns = (await manager.query(`
      SELECT c.id, c.name, c.state, c.role, c.local_delta_c_m2s2 AS local_dc, sa.latitude_deg AS lat_a, sb.latitude_deg AS lat_b,
             sa.longitude_deg AS lon_a, sb.longitude_deg AS lon_b, sa.ellipsoidal_height_m AS eh_a, sb.ellipsoidal_height_m AS eh_b,
             sa.ellipsoidal_height_m - sa.quasigeoid_height_m AS h_a, sb.ellipsoidal_height_m - sb.quasigeoid_height_m AS h_b
        FROM campaign c JOIN site sa ON sa.id = c.site_a_id JOIN site sb ON sb.id = c.site_b_id
       WHERE c.state <> 'draft' ORDER BY c.created_at, c.period_start, c.name`)) as { id: string; name: string; state: string; role: string; local_dc: number | null; lat_a: number; lat_b: number; lon_a: number; lon_b: number; eh_a: number; eh_b: number; h_a: number; h_b: number }[];
    // The transportable-clock campaigns take the generator seeds after all others, so the other series stay as they were.
    campaigns.sort((x, y) => Number(TRANSPORT_OFFSETS.has(x.name)) - Number(TRANSPORT_OFFSETS.has(y.name)));
    let n = 0;
    for (const c of campaigns) {
      const campaign = (await loadCampaignForUpload(manager, c.id))!;
      // ΔC = C_B − C_A with C = γ̄·H at each site (mean normal gravity along the plumb line), so the invented
      // series agrees with the sites' registered normal heights.
      // A side-by-side campaign sees its entered local tie instead; the transportable clock's invented offset is added.
      const yGrav = (c.role === 'side-by-side' && c.local_dc !== null
        ? c.local_dc / C2_M2_PER_S2
        : (meanNormalGravity(c.lat_b, c.h_b) * c.h_b - meanNormalGravity(c.lat_a, c.h_a) * c.h_a) / C2_M2_PER_S2) + (TRANSPORT_OFFSETS.get(c.name) ?? 0);
      const sites = {
        a: { latitudeDeg: c.lat_a, longitudeDeg: c.lon_a, ellipsoidalHeightM: c.eh_a },
        b: { latitudeDeg: c.lat_b, longitudeDeg: c.lon_b, ellipsoidalHeightM: c.eh_b },
      };
      const csv = inventedSeriesCsv({ startMjd: Math.ceil(campaign.periodStartMjd) + 0.25, yGrav, asRatio: campaign.referenceRatio === '1', seed: 1000 + n, label: c.name, sites });
      const stored = await storeSeries(client, null, {
        campaign, fileName: `invented-${c.name.replace(/[^A-Za-z0-9]+/g, '-').toLowerCase()}.csv`, source: Readable.from([Buffer.from(csv)]),
        fields: { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: campaign.referenceRatio === '1' ? 'ratio' : 'offset', flagColumn: '3' },
        limitBytes: 64 * 1024 * 1024, invented: true,
      });
      // The same audit event a real upload writes, so the campaign's audit trail lists its series.
      await recordAudit(manager, null, {
        action: 'campaign.series-uploaded', entityType: 'ratio_series', entityId: stored.id, instituteId: campaign.instituteId,
        details: { campaignId: c.id, fileName: stored.file_name, sha256: stored.sha256, rows: stored.row_count, valid: stored.valid_count, invented: true },
      });
      n++;
    }
    await recordAudit(manager, null, { action: 'demo.series-seeded', entityType: 'database', details: { scenario: `invented ratio series for ${n} campaigns`, samplesPerSeries: SAMPLES, tau0Seconds: TAU0_S } });
  },
};
