import type { CampaignState } from '../shared/campaigns';
import type { BudgetRow } from '../shared/registry';
import { recordAudit } from '../server/audit/audit.service';
import type { Actor } from '../server/auth/actor';
import { defaultReferenceRatio } from '../server/campaigns/campaigns.service';
import {
  CampaignEntity,
  CampaignEventEntity,
  ClockBudgetVersionEntity,
  ClockDeploymentEntity,
  ClockEntity,
  FibreLinkEntity,
  SiteEntity,
  type CampaignRow,
  type ClockRow,
  type SiteRow,
} from '../server/db/entities/registry.entities';
import { budgetTotals } from '../server/registry/registry.service';
import { toGrs80Geodetic } from '../server/science/geodesy';
import type { Seeder } from './demo';
import { demoPeople } from './people';

// INVENTED demo scenario of a transportable clock: the coordinating institute's transportable Sr lattice clock
// NGCO-TSr1 is compared side by side with SCL-Sr1 from a trailer bay beside the SCL clock hall (local tie entered
// with its source), taken by road to an invented tide-gauge station "Harbour Light" a few metres lower (benchmark
// tie, arbitrary coordinates, fibre to the SCL hall), compared there, and brought back for a closing side-by-side
// comparison. Nothing here describes a real place, instrument or measurement.

/** The three accepted campaigns of the scenario, by role; other features look them up by these names. */
export const TRANSPORT_CAMPAIGNS = {
  before: 'NGCO-TSr1 side by side at SCL, before transport (April 2026)',
  remote: 'NGCO-TSr1 remote at Harbour Light tide gauge (May 2026)',
  after: 'NGCO-TSr1 side by side at SCL, after transport (June 2026)',
} as const;
export const TRANSPORTABLE_CLOCK = 'NGCO-TSr1';
export const TRANSPORT_SITES = { trailerBay: 'SCL trailer bay', harbourLight: 'Harbour Light tide-gauge station' } as const;

/**
 * The invented systematic offset of NGCO-TSr1 against SCL-Sr1 in each campaign's series (fractional, B − A, beyond
 * gravity and tides): it drifts slightly over the transport, so the before/after check shows a small difference.
 */
export const TRANSPORT_OFFSETS = new Map<string, number>([
  [TRANSPORT_CAMPAIGNS.before, 2.4e-17],
  [TRANSPORT_CAMPAIGNS.remote, 2.6e-17],
  [TRANSPORT_CAMPAIGNS.after, 2.8e-17],
]);

/** Local tie trailer bay − clock hall entered for the side-by-side campaigns [m²/s²], k = 1. */
export const TRAILER_BAY_TIE = {
  deltaC_m2s2: -4.121,
  uncertainty_m2s2: 0.03,
  source: 'Invented demo: spirit levelling SCL-BM1 → trailer-bay pillar → NGCO-TSr1 reference mark, SCL survey note 26-07 (30 March 2026); Δh = −0.420 m, g = 9.8146 m/s² measured at the hall',
} as const;

const tsrBudget = (bbr: number, lattice: number, transport: number): BudgetRow[] => [
  { effect: 'Blackbody radiation, static', correction: 4.95e-15, uncertainty: bbr, type: 'B', note: 'trailer enclosure, 6 sensors (invented)' },
  { effect: 'Blackbody radiation, dynamic', correction: 3.46e-16, uncertainty: 0.8e-18, type: 'B', note: '' },
  { effect: 'Lattice light shift', correction: -1.5e-18, uncertainty: lattice, type: 'B', note: 'operational magic wavelength' },
  { effect: 'Density shift', correction: 2.5e-18, uncertainty: 1.2e-18, type: 'A', note: '' },
  { effect: 'Second-order Zeeman', correction: 1.73e-16, uncertainty: 0.3e-18, type: 'B', note: '' },
  { effect: 'Alignment after transport', correction: 0, uncertainty: transport, type: 'B', note: 'invented allowance for re-assembly' },
];

export const transportSeeder: Seeder = {
  name: 'transportable clock NGCO-TSr1 (invented)',
  run: async ({ manager, instituteIds, userIds }) => {
    const person = (email: string) => {
      const p = demoPeople.find((d) => d.email === email)!;
      const actor: Actor = { userId: userIds[email], email, displayName: p.displayName, role: p.role as Actor['role'], instituteId: p.instituteCode ? instituteIds[p.instituteCode] : null, via: 'session' };
      return { id: userIds[email], name: p.displayName, actor };
    };
    const ines = person('ines.varga@saltmarsh-lab.invalid');
    const ansel = person('ansel.brandt@geopotential-office.invalid');
    const day = (iso: string) => new Date(iso);
    const sites = manager.getRepository(SiteEntity);
    const hall = await sites.findOneByOrFail({ name: 'SCL clock hall' });
    const sr1 = await manager.getRepository(ClockEntity).findOneByOrFail({ name: 'SCL-Sr1' });
    const sr1Budget = await manager.getRepository(ClockBudgetVersionEntity).findOneByOrFail({ clockId: sr1.id, version: sr1.currentBudgetVersion });

    const site = async (s: { institute: string; name: string; ref: string; lat: number; lon: number; normalHeightM: number; zeta: number; uZeta: number; tie: [string, number, number]; at: string }) => {
      const coords = [Math.round(s.lon * 1e7) / 1e7, Math.round(s.lat * 1e7) / 1e7, Math.round((s.normalHeightM + s.zeta) * 1000) / 1000];
      const p = toGrs80Geodetic('EPSG:4937', coords);
      return sites.save({
        instituteId: instituteIds[s.institute], name: s.name, referencePoint: s.ref, crs: 'EPSG:4937', coordinates: coords,
        latitudeDeg: p.latitudeDeg, longitudeDeg: p.longitudeDeg, ellipsoidalHeightM: p.ellipsoidalHeightM, ellipsoidalHeightUncertaintyM: 0.012,
        xM: p.x, yM: p.y, zM: p.z, assumptions: p.assumptions,
        quasigeoidSource: 'entered', quasigeoidGridId: null, quasigeoidHeightM: s.zeta, quasigeoidUncertaintyM: s.uZeta,
        ellipsoidalCrustSystem: 'tide-free', quasigeoidTideSystem: 'zero-tide',
        benchmarkCode: s.tie[0], tieHeightDifferenceM: s.tie[1], tieUncertaintyM: s.tie[2], createdAt: day(s.at), updatedAt: day(s.at),
      } as SiteRow);
    };
    // The hall's normal height is 8.80 m (h 48.2 m, ζ 39.4 m); the trailer bay is 0.42 m lower, Harbour Light 5.75 m lower.
    const hallH = hall.ellipsoidalHeightM - hall.quasigeoidHeightM;
    const trailer = await site({
      institute: 'SCL', name: TRANSPORT_SITES.trailerBay, ref: 'Brass mark on the concrete pillar under the trailer’s optical table',
      lat: hall.latitudeDeg + 0.0003, lon: hall.longitudeDeg + 0.0006, normalHeightM: hallH - 0.42, zeta: hall.quasigeoidHeightM, uZeta: 0.02,
      tie: ['SCL-BM1', (hall.tieHeightDifferenceM ?? 1.8) - 0.42, 0.002], at: '2026-03-25T09:00:00Z',
    });
    const harbour = await site({
      institute: 'NGCO', name: TRANSPORT_SITES.harbourLight, ref: 'Stainless bolt in the gauge-house floor beside the tide-gauge benchmark HL-TG1',
      lat: 54.3502, lon: 11.1207, normalHeightM: hallH - 5.75, zeta: 39.6, uZeta: 0.03, tie: ['HL-TG1', 0.35, 0.002], at: '2026-03-26T10:00:00Z',
    });

    const sr87Hz = '429228004229873.7';
    const clocks = manager.getRepository(ClockEntity);
    const tsr = await clocks.save({
      siteId: trailer.id, instituteId: instituteIds.NGCO, name: TRANSPORTABLE_CLOCK, kind: 'optical_lattice', species: 'Sr87', nominalFrequencyHz: sr87Hz,
      notes: 'Invented demo clock: transportable Sr lattice clock in an air-conditioned trailer; home base the SCL trailer bay.', mobility: 'transportable',
      currentBudgetVersion: 3, createdAt: day('2026-03-27T08:00:00Z'), updatedAt: day('2026-06-03T12:00:00Z'),
    } as ClockRow);

    const deployments = manager.getRepository(ClockDeploymentEntity);
    const dep = async (siteId: string, arrived: string, departed: string | null, note: string) =>
      deployments.save({ clockId: tsr.id, siteId, arrivedAt: day(arrived), departedAt: departed ? day(departed) : null, note, createdByUserId: ansel.id, createdBy: ansel.name, createdAt: day(arrived), updatedAt: day(arrived) });
    const d1 = await dep(trailer.id, '2026-03-30T08:00:00Z', '2026-04-27T07:00:00Z', 'Set up beside the SCL clock hall for the calibration before transport.');
    const d2 = await dep(harbour.id, '2026-04-28T16:00:00Z', '2026-05-29T08:00:00Z', 'Transported by road on 27–28 April (about 40 km); re-assembled and re-evaluated at the gauge house.');
    const d3 = await dep(trailer.id, '2026-06-01T15:00:00Z', null, 'Back at the SCL trailer bay after transport on 29 May–1 June for the closing calibration.');

    const versions = manager.getRepository(ClockBudgetVersionEntity);
    const budgetVersion = async (version: number, rows: BudgetRow[], comment: string, deploymentId: string, at: string) =>
      versions.save({ clockId: tsr.id, version, rows, ...budgetTotals(rows), comment, deploymentId, createdByUserId: ansel.id, createdBy: ansel.name, createdAt: day(at) });
    // All three campaigns of the chain pin version 1, the evaluation in force at the first calibration, so NGCO-TSr1's
    // systematic offset is the same quantity in each and cancels in the chain; versions 2 and 3 record the
    // re-evaluations at Harbour Light and back at the trailer bay (tied to those deployments) for later campaigns.
    const v1 = await budgetVersion(1, tsrBudget(2.0e-18, 2.2e-18, 1.0e-18), 'first version, evaluated at the SCL trailer bay', d1.id, '2026-03-31T10:00:00Z');
    await budgetVersion(2, tsrBudget(2.4e-18, 2.2e-18, 1.5e-18), 're-evaluated at Harbour Light after transport (warmer gauge house)', d2.id, '2026-04-30T11:00:00Z');
    await budgetVersion(3, tsrBudget(2.0e-18, 2.2e-18, 1.5e-18), 're-evaluated back at the SCL trailer bay', d3.id, '2026-06-03T12:00:00Z');

    const links = manager.getRepository(FibreLinkEntity);
    const bayLink = await links.save({ name: 'SCL hall–trailer bay', siteAId: hall.id, siteBId: trailer.id, fibreLengthKm: 0.15, fractionalUncertainty: 1e-20, notes: 'Invented: noise-cancelled patch fibre from lab 2 to the trailer bay.', createdAt: day('2026-03-28T09:00:00Z'), updatedAt: day('2026-03-28T09:00:00Z') });
    const harbourLink = await links.save({ name: 'SCL–Harbour Light', siteAId: hall.id, siteBId: harbour.id, fibreLengthKm: 41.7, fractionalUncertainty: 5e-20, notes: 'Invented: dark fibre along the coast road, one bidirectional amplifier.', createdAt: day('2026-03-28T09:10:00Z'), updatedAt: day('2026-03-28T09:10:00Z') });

    const ratio = await defaultReferenceRatio(manager, 'Sr87', 'Sr87');
    type Step = [CampaignState, string, typeof ines];
    const campaign = async (name: string, role: CampaignRow['role'], siteB: SiteRow, link: { id: string }, budgetB: { id: string; version: number }, start: string, end: string, notes: string, steps: Step[]) => {
      const tie = role === 'side-by-side' ? { localDeltaC_m2s2: TRAILER_BAY_TIE.deltaC_m2s2, localDeltaCUncertainty_m2s2: TRAILER_BAY_TIE.uncertainty_m2s2, localTieSource: TRAILER_BAY_TIE.source } : { localDeltaC_m2s2: null, localDeltaCUncertainty_m2s2: null, localTieSource: null };
      const final = steps[steps.length - 1];
      const row = await manager.getRepository(CampaignEntity).save({
        name, instituteId: sr1.instituteId, clockAId: sr1.id, clockBId: tsr.id, linkId: link.id, role, siteAId: hall.id, siteBId: siteB.id, ...tie,
        periodStart: day(start), periodEnd: day(end),
        referenceRatio: ratio.value, referenceRatioRelativeUncertainty: ratio.relativeUncertainty, referenceRatioSource: ratio.source, referenceRatioJustification: null,
        operatorNotes: notes, budgetVersionAId: sr1Budget.id, budgetVersionBId: budgetB.id,
        state: final[0], returnReason: null, createdByUserId: steps[0][2].id, createdBy: steps[0][2].name, createdAt: day(steps[0][1]), updatedAt: day(final[1]),
        acceptedBy: ansel.name, acceptedAt: day(final[1]), acceptanceComment: 'Demo: reviewed against the pinned budgets, the deployment record and the uploaded series.',
      } as CampaignRow);
      let prev: CampaignState | null = null;
      for (const [state, at, who] of steps) {
        await manager.getRepository(CampaignEventEntity).insert({ campaignId: row.id, at: day(at), fromState: prev, toState: state, actorUserId: who.id, actorLabel: who.name, note: prev === null ? 'created' : null });
        const details = prev === null ? { name, clockA: sr1.name, clockB: tsr.name, role, siteAId: hall.id, siteBId: siteB.id, localTie: tie, referenceRatio: ratio.value, budgetVersionA: sr1Budget.version, budgetVersionB: budgetB.version } : { from: prev, to: state, note: null };
        await recordAudit(manager, who.actor, { action: prev === null ? 'campaign.created' : `campaign.${state}`, entityType: 'campaign', entityId: row.id, instituteId: row.instituteId, details, at: day(at) });
        prev = state;
      }
      return row;
    };
    const accepted = (created: string, submitted: string, review: string, acceptedAt: string): Step[] => [['draft', created, ines], ['submitted', submitted, ines], ['in_review', review, ansel], ['accepted', acceptedAt, ansel]];
    await campaign(TRANSPORT_CAMPAIGNS.before, 'side-by-side', trailer, bayLink, v1, '2026-04-06T00:00:00Z', '2026-04-17T00:00:00Z',
      'Invented demo campaign: calibration of NGCO-TSr1 against SCL-Sr1 before transport; local tie from the SCL survey note.', accepted('2026-04-01T09:00:00Z', '2026-04-20T10:00:00Z', '2026-04-21T08:30:00Z', '2026-04-23T15:00:00Z'));
    await campaign(TRANSPORT_CAMPAIGNS.remote, 'remote', harbour, harbourLink, v1, '2026-05-06T00:00:00Z', '2026-05-20T00:00:00Z',
      'Invented demo campaign: NGCO-TSr1 at the Harbour Light gauge house, compared with SCL-Sr1 over the coast-road fibre.', accepted('2026-04-30T12:00:00Z', '2026-05-22T09:30:00Z', '2026-05-25T08:00:00Z', '2026-05-28T14:00:00Z'));
    await campaign(TRANSPORT_CAMPAIGNS.after, 'side-by-side', trailer, bayLink, v1, '2026-06-08T00:00:00Z', '2026-06-19T00:00:00Z',
      'Invented demo campaign: closing calibration of NGCO-TSr1 against SCL-Sr1 after transport.', accepted('2026-06-03T13:00:00Z', '2026-06-22T10:00:00Z', '2026-06-23T08:15:00Z', '2026-06-25T16:30:00Z'));
    for (const d of [d1, d2, d3]) {
      await recordAudit(manager, ansel.actor, { action: 'clock.deployment-added', entityType: 'clock', entityId: tsr.id, instituteId: tsr.instituteId, details: { deploymentId: d.id, siteId: d.siteId, arrivedAt: d.arrivedAt.toISOString(), departedAt: d.departedAt?.toISOString() ?? null, note: d.note }, at: d.arrivedAt });
    }
    await recordAudit(manager, null, { action: 'demo.transport-seeded', entityType: 'database', details: { scenario: 'invented transportable clock NGCO-TSr1: 2 sites, 3 deployments, 2 links, 3 accepted campaigns' } });
  },
};
