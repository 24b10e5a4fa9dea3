import crypto from 'node:crypto';
import type { CampaignState } from '../shared/campaigns';
import type { BudgetRow } from '../shared/registry';
import { recordAudit, type AuditInput } from '../server/audit/audit.service';
import type { Actor } from '../server/auth/actor';
import { defaultReferenceRatio } from '../server/campaigns/campaigns.service';
import {
  CampaignEntity,
  CampaignEventEntity,
  ClockBudgetVersionEntity,
  ClockEntity,
  FibreLinkEntity,
  QuasigeoidGridEntity,
  SiteEntity,
  type CampaignRow,
  type ClockRow,
  type SiteRow,
} from '../server/db/entities/registry.entities';
import { budgetTotals } from '../server/registry/registry.service';
import { toGrs80Geodetic, transform } from '../server/science/geodesy';
import { interpolateQuasigeoidHeight, parseQuasigeoidGrid } from '../server/science/quasigeoid-grid';
import type { Seeder } from './demo';
import { demoPeople } from './people';

// INVENTED demo registry: the coastal lab SCL and the mountain lab HMO (two sites), an invented quasigeoid grid,
// two ⁸⁷Sr lattice clocks and one ¹⁷¹Yb⁺ ion clock with 1e-18-level budgets, two fibre links and campaigns in
// every state but "certified". Nothing here describes a real place, instrument or measurement.

/** Smooth invented quasigeoid over the demo country, metres. */
const inventedZeta = (lat: number, lon: number) => 39.4 + (54.2 - lat) * 0.62 + (lon - 10.9) * 0.1 + 0.05 * Math.sin(lat * 3) * Math.cos(lon * 2);

function inventedGridText(): string {
  const lines = ['# INVENTED demo quasigeoid grid (not a real model). latitude longitude height', '# degrees (GRS80), degrees, metres'];
  for (let lat = 50; lat <= 56.0001; lat += 0.5) for (let lon = 8; lon <= 13.0001; lon += 0.5) lines.push(`${lat.toFixed(2)} ${lon.toFixed(2)} ${inventedZeta(lat, lon).toFixed(3)}`);
  return lines.join('\n') + '\n';
}

const srBudget = (bbr: number, lattice: number, density: number): BudgetRow[] => [
  { effect: 'Blackbody radiation, static', correction: 4.962e-15, uncertainty: bbr, type: 'B', note: 'room-temperature enclosure, 8 sensors (invented)' },
  { effect: 'Blackbody radiation, dynamic', correction: 3.47e-16, uncertainty: 0.6e-18, type: 'B', note: '' },
  { effect: 'Lattice light shift', correction: -1.2e-18, uncertainty: lattice, type: 'B', note: 'operational magic wavelength' },
  { effect: 'Density shift', correction: 3.0e-18, uncertainty: density, type: 'A', note: 'interleaved high/low density' },
  { effect: 'Second-order Zeeman', correction: 1.738e-16, uncertainty: 0.2e-18, type: 'B', note: '' },
  { effect: 'Probe light shift', correction: 0.1e-18, uncertainty: 0.1e-18, type: 'B', note: '' },
  { effect: 'Background gas collisions', correction: 0.6e-18, uncertainty: 0.3e-18, type: 'B', note: '' },
  { effect: 'DC Stark', correction: 0.2e-18, uncertainty: 0.2e-18, type: 'B', note: '' },
  { effect: 'Servo error', correction: 0, uncertainty: 0.3e-18, type: 'A', note: '' },
];
const ybBudget: BudgetRow[] = [
  { effect: 'Blackbody radiation', correction: 70.5e-18, uncertainty: 1.8e-18, type: 'B', note: 'trap temperature rise from RF heating (invented)' },
  { effect: 'Second-order Doppler, micromotion', correction: 1.0e-18, uncertainty: 0.7e-18, type: 'B', note: '' },
  { effect: 'Second-order Doppler, thermal', correction: 2.1e-18, uncertainty: 0.8e-18, type: 'B', note: '' },
  { effect: 'Quadratic Zeeman', correction: 0.3e-18, uncertainty: 0.1e-18, type: 'B', note: '' },
  { effect: 'Electric quadrupole', correction: 0, uncertainty: 0.5e-18, type: 'B', note: 'averaged over three field orientations' },
  { effect: 'Probe light shift (residual)', correction: 0, uncertainty: 1.1e-18, type: 'B', note: 'hyper-Ramsey probing' },
  { effect: 'Servo error', correction: 0, uncertainty: 0.5e-18, type: 'A', note: '' },
];

export const registrySeeder: Seeder = {
  name: 'registry and campaigns',
  run: async ({ manager, instituteIds, userIds }) => {
    // Each seeded person also as the Actor the services would see, so the seeded audit events read like real ones.
    const person = (email: string) => {
      const p = demoPeople.find((d) => d.email === email)!;
      const actor: Actor = { userId: userIds[email], email, displayName: p.displayName, role: p.role as Actor['role'], instituteId: p.instituteCode ? instituteIds[p.instituteCode] : null, via: 'session' };
      return { id: userIds[email], name: p.displayName, actor };
    };
    const ines = person('ines.varga@saltmarsh-lab.invalid');
    const mira = person('mira.ostrowe@highridge-obs.invalid');
    const ansel = person('ansel.brandt@geopotential-office.invalid');
    const tomas = userIds['tomas.reyland@saltmarsh-lab.invalid'] ? person('tomas.reyland@saltmarsh-lab.invalid') : ines;
    // Invented history: registry records carry creation dates before the campaigns that use them.
    const day = (iso: string) => new Date(iso);

    const gridText = inventedGridText();
    const grid = parseQuasigeoidGrid(gridText);
    const gridRow = await manager.getRepository(QuasigeoidGridEntity).save({
      name: 'Demo quasigeoid 2026 (invented)', fileName: 'demo-quasigeoid-2026.txt', sha256: crypto.createHash('sha256').update(gridText).digest('hex'),
      ...grid, heightsM: Array.from(grid.heightsM), uncertaintyM: 0.03, tideSystem: 'zero-tide', correlationLengthKm: null, uploadedBy: ansel.name, createdAt: day('2026-01-08T10:00:00Z'),
    });

    const site = async (s: { institute: string; name: string; ref: string; crs: string; coords: number[]; uH: number; zeta: { heightM: number; u: number } | 'grid'; tie: [string, number, number]; at: string }) => {
      const p = toGrs80Geodetic(s.crs, s.coords);
      const zetaM = s.zeta === 'grid' ? interpolateQuasigeoidHeight(grid, p.latitudeDeg, p.longitudeDeg) : s.zeta.heightM;
      return manager.getRepository(SiteEntity).save({
        instituteId: instituteIds[s.institute], name: s.name, referencePoint: s.ref, crs: s.crs, coordinates: s.coords,
        latitudeDeg: p.latitudeDeg, longitudeDeg: p.longitudeDeg, ellipsoidalHeightM: p.ellipsoidalHeightM, ellipsoidalHeightUncertaintyM: s.uH,
        xM: p.x, yM: p.y, zM: p.z, assumptions: p.assumptions,
        quasigeoidSource: s.zeta === 'grid' ? 'grid' : 'entered', quasigeoidGridId: s.zeta === 'grid' ? gridRow.id : null,
        quasigeoidHeightM: zetaM, quasigeoidUncertaintyM: s.zeta === 'grid' ? gridRow.uncertaintyM : s.zeta.u,
        // Invented but explicit: GNSS heights tide-free (ITRF convention), ζ zero-tide (grid and entered value alike).
        ellipsoidalCrustSystem: 'tide-free', quasigeoidTideSystem: 'zero-tide',
        benchmarkCode: s.tie[0], tieHeightDifferenceM: s.tie[1], tieUncertaintyM: s.tie[2], createdAt: day(s.at), updatedAt: day(s.at),
      } as SiteRow);
    };
    // SCL is entered in ETRS89 / UTM 32N (E, N, h), HMO in ETRS89 geocentric X, Y, Z: both CRS kinds appear in the demo.
    const sclUtm = transform('EPSG:4937', 'EPSG:25832', [10.9004, 54.2003, 48.2]).map((v) => Math.round(v * 1000) / 1000);
    const scl = await site({ institute: 'SCL', name: 'SCL clock hall', ref: 'Top of the brass reference mark on the optical table of lab 2, 1.10 m below the atoms', crs: 'EPSG:25832', coords: sclUtm, uH: 0.01, zeta: { heightM: 39.4, u: 0.02 }, tie: ['SCL-BM1', 1.8, 0.002], at: '2026-01-12T09:30:00Z' });
    const hmoXyz = transform('EPSG:4937', 'EPSG:4936', [10.4008, 51.6005, 549.45 + inventedZeta(51.6005, 10.4008)]).map((v) => Math.round(v * 1000) / 1000);
    const hmo = await site({ institute: 'HMO', name: 'HMO clock hall', ref: 'Centre of the steel pier plate under the lattice-clock vacuum chamber', crs: 'EPSG:4936', coords: hmoXyz, uH: 0.015, zeta: 'grid', tie: ['HMO-BM1', 1.25, 0.003], at: '2026-01-13T14:00:00Z' });
    const hmoIon = await site({ institute: 'HMO', name: 'HMO ion lab', ref: 'Engraved cross on the ion-trap breadboard, ground floor of the east wing', crs: 'EPSG:4937', coords: [10.4029, 51.6014, 546.9 + inventedZeta(51.6014, 10.4029)], uH: 0.015, zeta: 'grid', tie: ['HMO-BM1', -1.3, 0.003], at: '2026-01-13T14:20:00Z' });

    const clock = async (c: { site: SiteRow; name: string; kind: ClockRow['kind']; species: ClockRow['species']; nu: string; notes: string; budgets: [BudgetRow[], string, typeof ines, string][] }) => {
      const [created, last] = [day(c.budgets[0][3]), day(c.budgets[c.budgets.length - 1][3])];
      const row = await manager.getRepository(ClockEntity).save({ siteId: c.site.id, instituteId: c.site.instituteId, name: c.name, kind: c.kind, species: c.species, nominalFrequencyHz: c.nu, notes: c.notes, currentBudgetVersion: c.budgets.length, createdAt: created, updatedAt: last } as ClockRow);
      const versions = [];
      for (const [i, [rows, comment, by, at]] of c.budgets.entries()) {
        versions.push(await manager.getRepository(ClockBudgetVersionEntity).save({ clockId: row.id, version: i + 1, rows, ...budgetTotals(rows), comment, createdByUserId: by.id, createdBy: by.name, createdAt: day(at) }));
      }
      return { row, versions };
    };
    // Nominal frequencies are the in-use reference-table values of each species (CIPM 2009 list, registry migration),
    // so the demo clocks and the reference-data page show the same number.
    const sr87Hz = '429228004229873.7';
    const yb171E3Hz = '642121496772657';
    const sr1 = await clock({ site: scl, name: 'SCL-Sr1', kind: 'optical_lattice', species: 'Sr87', nu: sr87Hz, notes: 'Invented demo clock: 1D lattice, cryogenic shield planned.', budgets: [[srBudget(1.1e-18, 1.5e-18, 0.8e-18), 'first version', ines, '2026-01-14T10:05:00Z']] });
    const sr2 = await clock({ site: hmo, name: 'HMO-Sr2', kind: 'optical_lattice', species: 'Sr87', nu: sr87Hz, notes: 'Invented demo clock: transportable design on a fixed pier.', budgets: [[srBudget(2.4e-18, 1.9e-18, 1.0e-18), 'first version', mira, '2026-01-15T11:00:00Z'], [srBudget(1.4e-18, 1.7e-18, 0.9e-18), 'new temperature sensors calibrated', mira, '2026-02-11T16:40:00Z']] });
    const yb = await clock({ site: hmoIon, name: 'HMO-YbIon', kind: 'single_ion', species: 'Yb171+E3', nu: yb171E3Hz, notes: 'Invented demo clock: single ion, E3 transition.', budgets: [[ybBudget, 'first version', mira, '2026-01-16T09:20:00Z']] });

    const links = manager.getRepository(FibreLinkEntity);
    const longLink = await links.save({ name: 'SCL–HMO long-haul', siteAId: scl.id, siteBId: hmo.id, fibreLengthKm: 420.6, fractionalUncertainty: 3e-19, notes: 'Invented: shared telecom fibre with two bidirectional amplifiers.', createdAt: day('2026-01-19T13:00:00Z'), updatedAt: day('2026-01-19T13:00:00Z') });
    const ionLink = await links.save({ name: 'SCL–HMO ion lab', siteAId: scl.id, siteBId: hmoIon.id, fibreLengthKm: 421.3, fractionalUncertainty: 3e-19, notes: 'Invented: second fibre pair of the long-haul cable, spliced through to the ion lab.', createdAt: day('2026-01-19T13:20:00Z'), updatedAt: day('2026-01-19T13:20:00Z') });
    const localLink = await links.save({ name: 'HMO local', siteAId: hmo.id, siteBId: hmoIon.id, fibreLengthKm: 0.42, fractionalUncertainty: 1e-20, notes: 'Invented: noise-cancelled campus fibre.', createdAt: day('2026-01-19T13:10:00Z'), updatedAt: day('2026-01-19T13:10:00Z') });

    const srRatio = await defaultReferenceRatio(manager, 'Sr87', 'Sr87');
    const ybRatio = await defaultReferenceRatio(manager, 'Sr87', 'Yb171+E3');
    type Step = [CampaignState, string, typeof ines, string | null];
    // The audit events the campaign service records for the same steps (campaign.created, campaign.<state>), written
    // after all campaigns in time order so the hash chain runs forward in time.
    const history: { at: Date; actor: Actor; input: AuditInput }[] = [];
    const campaign = async (name: string, a: typeof sr1, b: typeof sr1, link: { id: string }, start: string, end: string, notes: string, steps: Step[]) => {
      const ratio = a.row.species === b.row.species ? srRatio : ybRatio;
      const final = steps[steps.length - 1];
      const row = await manager.getRepository(CampaignEntity).save({
        name, instituteId: a.row.instituteId, clockAId: a.row.id, clockBId: b.row.id, linkId: link.id, periodStart: new Date(start), periodEnd: new Date(end),
        referenceRatio: ratio.value, referenceRatioRelativeUncertainty: ratio.relativeUncertainty, referenceRatioSource: ratio.source, referenceRatioJustification: null,
        operatorNotes: notes, budgetVersionAId: a.versions[a.versions.length - 1].id, budgetVersionBId: b.versions[b.versions.length - 1].id,
        state: final[0], returnReason: final[0] === 'returned' ? final[3] : null, createdByUserId: steps[0][2].id, createdBy: steps[0][2].name,
        createdAt: day(steps[0][1]), updatedAt: day(final[1]),
      } as CampaignRow);
      let prev: CampaignState | null = null;
      for (const [state, at, who, note] of steps) {
        await manager.getRepository(CampaignEventEntity).insert({ campaignId: row.id, at: day(at), fromState: prev, toState: state, actorUserId: who.id, actorLabel: who.name, note });
        const details =
          prev === null
            ? { name, clockA: a.row.name, clockB: b.row.name, referenceRatio: ratio.value, budgetVersionA: a.versions.length, budgetVersionB: b.versions.length }
            : { from: prev, to: state, note };
        history.push({ at: day(at), actor: who.actor, input: { action: prev === null ? 'campaign.created' : `campaign.${state}`, entityType: 'campaign', entityId: row.id, instituteId: row.instituteId, details, at: day(at) } });
        prev = state;
      }
      return row;
    };
    const ev = (state: CampaignState, at: string, who: typeof ines, note: string | null = null): Step => [state, at, who, note];
    await campaign('SCL–HMO Sr spring run 2026', sr1, sr2, longLink, '2026-03-02T00:00:00Z', '2026-03-20T00:00:00Z', 'Invented demo campaign. Both clocks ran unattended overnight.', [
      ev('draft', '2026-02-20T09:12:00Z', ines, 'created'), ev('submitted', '2026-03-24T15:40:00Z', ines), ev('in_review', '2026-03-26T08:05:00Z', ansel), ev('accepted', '2026-04-02T11:30:00Z', ansel),
    ]);
    await campaign('SCL–HMO Sr summer run 2026', sr1, sr2, longLink, '2026-06-08T00:00:00Z', '2026-06-26T00:00:00Z', 'Invented demo campaign. Amplifier 2 replaced on 2026-06-15.', [
      ev('draft', '2026-05-28T10:00:00Z', ines, 'created'), ev('submitted', '2026-06-30T14:10:00Z', ines), ev('in_review', '2026-07-01T09:00:00Z', ansel), ev('accepted', '2026-07-09T16:20:00Z', ansel),
    ]);
    await campaign('HMO Yb⁺/Sr local ratio, October 2026', sr2, yb, localLink, '2026-10-12T00:00:00Z', '2026-10-23T00:00:00Z', 'Invented demo campaign between the two HMO clocks.', [
      ev('draft', '2026-10-05T08:30:00Z', mira, 'created'), ev('submitted', '2026-10-26T12:00:00Z', mira), ev('in_review', '2026-10-28T09:45:00Z', ansel),
    ]);
    await campaign('SCL–HMO Sr autumn run 2026', sr1, sr2, longLink, '2026-09-14T00:00:00Z', '2026-10-02T00:00:00Z', 'Invented demo campaign.', [
      ev('draft', '2026-09-01T07:50:00Z', ines, 'created'), ev('submitted', '2026-11-24T10:15:00Z', ines),
    ]);
    await campaign('SCL–HMO Sr winter run 2026', sr1, sr2, longLink, '2026-11-02T00:00:00Z', '2026-11-20T00:00:00Z', 'Invented demo campaign.', [
      ev('draft', '2026-10-27T13:00:00Z', tomas, 'created'), ev('submitted', '2026-11-23T09:00:00Z', ines), ev('in_review', '2026-11-25T08:30:00Z', ansel),
      ev('returned', '2026-11-27T15:05:00Z', ansel, 'The operator notes do not say how the link noise was checked during the run; please add the amplifier log summary and resubmit.'),
    ]);
    await campaign('SCL–HMO Sr run January 2027', sr1, sr2, longLink, '2027-01-11T00:00:00Z', '2027-01-29T00:00:00Z', 'Invented demo campaign, being prepared.', [ev('draft', '2026-11-30T10:00:00Z', ines, 'created')]);
    await campaign('HMO Yb⁺/Sr local ratio, December 2026', sr2, yb, localLink, '2026-12-07T00:00:00Z', '2026-12-18T00:00:00Z', 'Invented demo campaign, being prepared.', [ev('draft', '2026-11-29T09:00:00Z', mira, 'created')]);
    // A three-clock loop: SCL-Sr1 → HMO-Sr2 → HMO-YbIon → SCL-Sr1, all three compared over the same days of October 2026.
    await campaign('SCL–HMO Sr October run 2026', sr1, sr2, longLink, '2026-10-12T00:00:00Z', '2026-10-23T00:00:00Z', 'Invented demo campaign, run alongside the HMO local Yb⁺/Sr comparison to close the loop of three clocks.', [
      ev('draft', '2026-10-28T08:00:00Z', ines, 'created'), ev('submitted', '2026-10-30T10:00:00Z', ines), ev('in_review', '2026-11-02T09:00:00Z', ansel),
    ]);
    await campaign('SCL–HMO ion lab Yb⁺/Sr, October 2026', sr1, yb, ionLink, '2026-10-12T00:00:00Z', '2026-10-23T00:00:00Z', 'Invented demo campaign over the second fibre pair, third side of the loop of three clocks.', [
      ev('draft', '2026-10-29T08:00:00Z', ines, 'created'), ev('submitted', '2026-10-31T10:00:00Z', ines), ev('in_review', '2026-11-03T09:00:00Z', ansel),
    ]);
    history.sort((x, y) => x.at.getTime() - y.at.getTime());
    for (const h of history) await recordAudit(manager, h.actor, h.input);
    await recordAudit(manager, null, { action: 'demo.registry-seeded', entityType: 'database', details: { scenario: 'invented demo registry: 3 sites, 3 clocks, 3 links, 9 campaigns' } });
  },
};
