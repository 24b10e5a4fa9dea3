import { EntitySchema } from 'typeorm';
import type { BudgetRow, SpeciesCode } from '../../../shared/registry';
import type { CampaignState } from '../../../shared/campaigns';
import type { InstituteRow } from './core.entities';

// Registry and campaign tables: sites, quasigeoid grids, clocks, immutable budget versions, reference
// frequencies, fibre links, campaigns and their state timeline.

// Postgres returns float8 as number already; numeric/bigint stay strings and are not used for measured values here.

export interface SiteRow {
  id: string;
  instituteId: string;
  institute?: InstituteRow;
  name: string;
  referencePoint: string;
  crs: string;
  coordinates: number[];
  latitudeDeg: number;
  longitudeDeg: number;
  ellipsoidalHeightM: number;
  ellipsoidalHeightUncertaintyM: number;
  xM: number;
  yM: number;
  zM: number;
  assumptions: string[];
  quasigeoidSource: 'entered' | 'grid';
  quasigeoidGridId: string | null;
  quasigeoidHeightM: number;
  quasigeoidUncertaintyM: number;
  /** Tide system of the quasigeoid height (null: not stated). */
  quasigeoidTideSystem?: 'mean-tide' | 'zero-tide' | 'tide-free' | null;
  /** Crust (permanent-tide) system of the ellipsoidal height: tide-free (conventional, as ITRF/GNSS) or mean-tide (= zero-tide crust). */
  ellipsoidalCrustSystem?: 'mean-tide' | 'zero-tide' | 'tide-free' | null;
  benchmarkCode: string | null;
  tieHeightDifferenceM: number | null;
  tieUncertaintyM: number | null;
  /** A tie given as ΔC = C_site − C_benchmark (m²/s²) instead of Δh, with its standard uncertainty. */
  tieDeltaC_m2s2: number | null;
  tieUncertaintyC_m2s2: number | null;
  tieSource: string | null;
  createdAt: Date;
  updatedAt: Date;
}
export const SiteEntity = new EntitySchema<SiteRow>({
  name: 'Site',
  tableName: 'site',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    instituteId: { name: 'institute_id', type: 'uuid' },
    name: { type: 'text' },
    referencePoint: { name: 'reference_point', type: 'text' },
    crs: { type: 'text' },
    coordinates: { type: 'jsonb' },
    latitudeDeg: { name: 'latitude_deg', type: 'float8' },
    longitudeDeg: { name: 'longitude_deg', type: 'float8' },
    ellipsoidalHeightM: { name: 'ellipsoidal_height_m', type: 'float8' },
    ellipsoidalHeightUncertaintyM: { name: 'ellipsoidal_height_u_m', type: 'float8' },
    xM: { name: 'x_m', type: 'float8' },
    yM: { name: 'y_m', type: 'float8' },
    zM: { name: 'z_m', type: 'float8' },
    assumptions: { type: 'jsonb' },
    quasigeoidSource: { name: 'quasigeoid_source', type: 'text' },
    quasigeoidGridId: { name: 'quasigeoid_grid_id', type: 'uuid', nullable: true },
    quasigeoidHeightM: { name: 'quasigeoid_height_m', type: 'float8' },
    quasigeoidUncertaintyM: { name: 'quasigeoid_u_m', type: 'float8' },
    quasigeoidTideSystem: { name: 'quasigeoid_tide_system', type: 'text', nullable: true },
    ellipsoidalCrustSystem: { name: 'ellipsoidal_crust_system', type: 'text', nullable: true },
    benchmarkCode: { name: 'benchmark_code', type: 'text', nullable: true },
    tieHeightDifferenceM: { name: 'tie_height_difference_m', type: 'float8', nullable: true },
    tieUncertaintyM: { name: 'tie_u_m', type: 'float8', nullable: true },
    tieDeltaC_m2s2: { name: 'tie_delta_c_m2s2', type: 'float8', nullable: true },
    tieUncertaintyC_m2s2: { name: 'tie_u_c_m2s2', type: 'float8', nullable: true },
    tieSource: { name: 'tie_source', type: 'text', nullable: true },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
    updatedAt: { name: 'updated_at', type: 'timestamptz', updateDate: true },
  },
  relations: {
    institute: { type: 'many-to-one', target: 'Institute', joinColumn: { name: 'institute_id' } },
  },
});

export interface QuasigeoidGridRow {
  id: string;
  name: string;
  fileName: string | null;
  sha256: string;
  latitudeMinDeg: number;
  longitudeMinDeg: number;
  latitudeStepDeg: number;
  longitudeStepDeg: number;
  latitudeCount: number;
  longitudeCount: number;
  /** Row-major heights (latitude ascending, then longitude ascending), metres. */
  heightsM: number[];
  uncertaintyM: number;
  tideSystem?: 'mean-tide' | 'zero-tide' | 'tide-free' | null;
  /** Correlation length of the grid's errors [km]; null: the default of server/science/registered-heights.ts. */
  correlationLengthKm?: number | null;
  uploadedBy: string;
  createdAt: Date;
}
export const QuasigeoidGridEntity = new EntitySchema<QuasigeoidGridRow>({
  name: 'QuasigeoidGrid',
  tableName: 'quasigeoid_grid',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    name: { type: 'text' },
    fileName: { name: 'file_name', type: 'text', nullable: true },
    sha256: { type: 'text', unique: true },
    latitudeMinDeg: { name: 'latitude_min_deg', type: 'float8' },
    longitudeMinDeg: { name: 'longitude_min_deg', type: 'float8' },
    latitudeStepDeg: { name: 'latitude_step_deg', type: 'float8' },
    longitudeStepDeg: { name: 'longitude_step_deg', type: 'float8' },
    latitudeCount: { name: 'latitude_count', type: 'int' },
    longitudeCount: { name: 'longitude_count', type: 'int' },
    heightsM: { name: 'heights_m', type: 'float8', array: true },
    uncertaintyM: { name: 'uncertainty_m', type: 'float8' },
    tideSystem: { name: 'tide_system', type: 'text', nullable: true },
    correlationLengthKm: { name: 'correlation_length_km', type: 'float8', nullable: true },
    uploadedBy: { name: 'uploaded_by', type: 'text' },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
  },
});

export interface ClockRow {
  id: string;
  siteId: string;
  site?: SiteRow;
  instituteId: string;
  institute?: InstituteRow;
  name: string;
  kind: 'optical_lattice' | 'single_ion' | 'microwave_fountain' | 'hydrogen_maser';
  species: SpeciesCode;
  nominalFrequencyHz: string;
  notes: string;
  /** Stationary: always at siteId. Transportable: siteId is its home base; where it stood when is in clock_deployment. */
  mobility: 'stationary' | 'transportable';
  currentBudgetVersion: number;
  createdAt: Date;
  updatedAt: Date;
}
export const ClockEntity = new EntitySchema<ClockRow>({
  name: 'Clock',
  tableName: 'clock',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    siteId: { name: 'site_id', type: 'uuid' },
    instituteId: { name: 'institute_id', type: 'uuid' },
    name: { type: 'text' },
    kind: { type: 'text' },
    species: { type: 'text' },
    nominalFrequencyHz: { name: 'nominal_frequency_hz', type: 'text' },
    notes: { type: 'text', default: '' },
    mobility: { type: 'text', default: 'stationary' },
    currentBudgetVersion: { name: 'current_budget_version', type: 'int' },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
    updatedAt: { name: 'updated_at', type: 'timestamptz', updateDate: true },
  },
  relations: {
    site: { type: 'many-to-one', target: 'Site', joinColumn: { name: 'site_id' } },
    institute: { type: 'many-to-one', target: 'Institute', joinColumn: { name: 'institute_id' } },
  },
});

export interface ClockBudgetVersionRow {
  id: string;
  clockId: string;
  version: number;
  rows: BudgetRow[];
  totalCorrection: number;
  totalUncertainty: number;
  comment: string | null;
  /** The deployment this evaluation was made for (a transportable clock re-evaluated at a remote site); null: not tied. */
  deploymentId: string | null;
  createdByUserId: string | null;
  createdBy: string;
  createdAt: Date;
}
export const ClockBudgetVersionEntity = new EntitySchema<ClockBudgetVersionRow>({
  name: 'ClockBudgetVersion',
  tableName: 'clock_budget_version',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    clockId: { name: 'clock_id', type: 'uuid' },
    version: { type: 'int' },
    rows: { type: 'jsonb' },
    totalCorrection: { name: 'total_correction', type: 'float8' },
    totalUncertainty: { name: 'total_uncertainty', type: 'float8' },
    comment: { type: 'text', nullable: true },
    deploymentId: { name: 'deployment_id', type: 'uuid', nullable: true },
    createdByUserId: { name: 'created_by_user_id', type: 'uuid', nullable: true },
    createdBy: { name: 'created_by', type: 'text' },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
  },
});

export interface ClockDeploymentRow {
  id: string;
  clockId: string;
  siteId: string;
  site?: SiteRow;
  arrivedAt: Date;
  /** null: still there. */
  departedAt: Date | null;
  note: string;
  createdByUserId: string | null;
  createdBy: string;
  createdAt: Date;
  updatedAt: Date;
}
export const ClockDeploymentEntity = new EntitySchema<ClockDeploymentRow>({
  name: 'ClockDeployment',
  tableName: 'clock_deployment',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    clockId: { name: 'clock_id', type: 'uuid' },
    siteId: { name: 'site_id', type: 'uuid' },
    arrivedAt: { name: 'arrived_at', type: 'timestamptz' },
    departedAt: { name: 'departed_at', type: 'timestamptz', nullable: true },
    note: { type: 'text', default: '' },
    createdByUserId: { name: 'created_by_user_id', type: 'uuid', nullable: true },
    createdBy: { name: 'created_by', type: 'text' },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
    updatedAt: { name: 'updated_at', type: 'timestamptz', updateDate: true },
  },
  relations: {
    site: { type: 'many-to-one', target: 'Site', joinColumn: { name: 'site_id' } },
  },
});

export interface ReferenceFrequencyRow {
  id: string;
  species: SpeciesCode;
  frequencyHz: string;
  relativeUncertainty: number;
  source: string;
  inUse: boolean;
  updatedAt: Date;
}
export const ReferenceFrequencyEntity = new EntitySchema<ReferenceFrequencyRow>({
  name: 'ReferenceFrequency',
  tableName: 'reference_frequency',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    species: { type: 'text' },
    frequencyHz: { name: 'frequency_hz', type: 'text' },
    relativeUncertainty: { name: 'relative_uncertainty', type: 'float8' },
    source: { type: 'text' },
    inUse: { name: 'in_use', type: 'boolean' },
    updatedAt: { name: 'updated_at', type: 'timestamptz', updateDate: true },
  },
});

export interface FibreLinkRow {
  id: string;
  name: string;
  siteAId: string;
  siteA?: SiteRow;
  siteBId: string;
  siteB?: SiteRow;
  fibreLengthKm: number;
  fractionalUncertainty: number;
  notes: string;
  createdAt: Date;
  updatedAt: Date;
}
export const FibreLinkEntity = new EntitySchema<FibreLinkRow>({
  name: 'FibreLink',
  tableName: 'fibre_link',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    name: { type: 'text' },
    siteAId: { name: 'site_a_id', type: 'uuid' },
    siteBId: { name: 'site_b_id', type: 'uuid' },
    fibreLengthKm: { name: 'fibre_length_km', type: 'float8' },
    fractionalUncertainty: { name: 'fractional_uncertainty', type: 'float8' },
    notes: { type: 'text', default: '' },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
    updatedAt: { name: 'updated_at', type: 'timestamptz', updateDate: true },
  },
  relations: {
    siteA: { type: 'many-to-one', target: 'Site', joinColumn: { name: 'site_a_id' } },
    siteB: { type: 'many-to-one', target: 'Site', joinColumn: { name: 'site_b_id' } },
  },
});

export interface CampaignRow {
  id: string;
  name: string;
  instituteId: string;
  institute?: InstituteRow;
  clockAId: string;
  clockA?: ClockRow;
  clockBId: string;
  clockB?: ClockRow;
  linkId: string;
  link?: FibreLinkRow;
  /** remote: clocks at different sites, the result is a potential difference; side-by-side: the offset between the clocks. */
  role: 'remote' | 'side-by-side';
  /** Where clock A and clock B stood during the period (from their deployments; a database trigger fills the registered sites when omitted). */
  siteAId: string;
  siteA?: SiteRow;
  siteBId: string;
  siteB?: SiteRow;
  /** Side-by-side only: C(site B) − C(site A) between the clocks' reference points [m²/s²], its standard uncertainty and source. */
  localDeltaC_m2s2: number | null;
  localDeltaCUncertainty_m2s2: number | null;
  localTieSource: string | null;
  periodStart: Date;
  periodEnd: Date;
  referenceRatio: string;
  referenceRatioRelativeUncertainty: number;
  referenceRatioSource: string;
  referenceRatioJustification: string | null;
  operatorNotes: string;
  budgetVersionAId: string;
  budgetVersionA?: ClockBudgetVersionRow;
  budgetVersionBId: string;
  budgetVersionB?: ClockBudgetVersionRow;
  state: CampaignState;
  returnReason: string | null;
  createdByUserId: string | null;
  createdBy: string;
  /** Reviewer's checklist: item → who ticked it and when (absent = not ticked). */
  reviewChecklist: Record<string, { by: string; at: string }>;
  acceptedByUserId: string | null;
  acceptedBy: string | null;
  acceptedAt: Date | null;
  acceptanceComment: string | null;
  acceptanceJustification: string | null;
  /** The exceptions (Eₙ not agreed, low uptime, …) the acceptance justification answers. */
  acceptanceExceptions: string[];
  createdAt: Date;
  updatedAt: Date;
}
export const CampaignEntity = new EntitySchema<CampaignRow>({
  name: 'Campaign',
  tableName: 'campaign',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    name: { type: 'text' },
    instituteId: { name: 'institute_id', type: 'uuid' },
    clockAId: { name: 'clock_a_id', type: 'uuid' },
    clockBId: { name: 'clock_b_id', type: 'uuid' },
    linkId: { name: 'link_id', type: 'uuid' },
    role: { type: 'text', default: 'remote' },
    siteAId: { name: 'site_a_id', type: 'uuid' },
    siteBId: { name: 'site_b_id', type: 'uuid' },
    localDeltaC_m2s2: { name: 'local_delta_c_m2s2', type: 'float8', nullable: true },
    localDeltaCUncertainty_m2s2: { name: 'local_delta_c_u_m2s2', type: 'float8', nullable: true },
    localTieSource: { name: 'local_tie_source', type: 'text', nullable: true },
    periodStart: { name: 'period_start', type: 'timestamptz' },
    periodEnd: { name: 'period_end', type: 'timestamptz' },
    referenceRatio: { name: 'reference_ratio', type: 'text' },
    referenceRatioRelativeUncertainty: { name: 'reference_ratio_u_rel', type: 'float8' },
    referenceRatioSource: { name: 'reference_ratio_source', type: 'text' },
    referenceRatioJustification: { name: 'reference_ratio_justification', type: 'text', nullable: true },
    operatorNotes: { name: 'operator_notes', type: 'text', default: '' },
    budgetVersionAId: { name: 'budget_version_a_id', type: 'uuid' },
    budgetVersionBId: { name: 'budget_version_b_id', type: 'uuid' },
    state: { type: 'text' },
    returnReason: { name: 'return_reason', type: 'text', nullable: true },
    createdByUserId: { name: 'created_by_user_id', type: 'uuid', nullable: true },
    createdBy: { name: 'created_by', type: 'text' },
    reviewChecklist: { name: 'review_checklist', type: 'jsonb', default: {} },
    acceptedByUserId: { name: 'accepted_by_user_id', type: 'uuid', nullable: true },
    acceptedBy: { name: 'accepted_by', type: 'text', nullable: true },
    acceptedAt: { name: 'accepted_at', type: 'timestamptz', nullable: true },
    acceptanceComment: { name: 'acceptance_comment', type: 'text', nullable: true },
    acceptanceJustification: { name: 'acceptance_justification', type: 'text', nullable: true },
    acceptanceExceptions: { name: 'acceptance_exceptions', type: 'jsonb', default: [] },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
    updatedAt: { name: 'updated_at', type: 'timestamptz', updateDate: true },
  },
  relations: {
    institute: { type: 'many-to-one', target: 'Institute', joinColumn: { name: 'institute_id' } },
    clockA: { type: 'many-to-one', target: 'Clock', joinColumn: { name: 'clock_a_id' } },
    clockB: { type: 'many-to-one', target: 'Clock', joinColumn: { name: 'clock_b_id' } },
    link: { type: 'many-to-one', target: 'FibreLink', joinColumn: { name: 'link_id' } },
    siteA: { type: 'many-to-one', target: 'Site', joinColumn: { name: 'site_a_id' } },
    siteB: { type: 'many-to-one', target: 'Site', joinColumn: { name: 'site_b_id' } },
    budgetVersionA: { type: 'many-to-one', target: 'ClockBudgetVersion', joinColumn: { name: 'budget_version_a_id' } },
    budgetVersionB: { type: 'many-to-one', target: 'ClockBudgetVersion', joinColumn: { name: 'budget_version_b_id' } },
  },
});

export interface CampaignEventRow {
  id: string;
  campaignId: string;
  at: Date;
  fromState: CampaignState | null;
  toState: CampaignState;
  actorUserId: string | null;
  actorLabel: string;
  note: string | null;
}
export const CampaignEventEntity = new EntitySchema<CampaignEventRow>({
  name: 'CampaignEvent',
  tableName: 'campaign_event',
  columns: {
    id: { type: 'bigint', primary: true, generated: 'increment' },
    campaignId: { name: 'campaign_id', type: 'uuid' },
    at: { type: 'timestamptz', default: () => 'now()' },
    fromState: { name: 'from_state', type: 'text', nullable: true },
    toState: { name: 'to_state', type: 'text' },
    actorUserId: { name: 'actor_user_id', type: 'uuid', nullable: true },
    actorLabel: { name: 'actor_label', type: 'text' },
    note: { type: 'text', nullable: true },
  },
});

export interface CalibrationChainRow {
  id: string;
  name: string;
  instituteId: string;
  transportableClockId: string;
  referenceClockId: string;
  remoteCampaignId: string;
  beforeCampaignId: string | null;
  afterCampaignId: string | null;
  /** Entered transport reproducibility (fractional standard uncertainty) and its source; null: from the before/after difference. */
  transportReproducibility: number | null;
  transportReproducibilitySource: string | null;
  notes: string;
  createdByUserId: string | null;
  createdBy: string;
  createdAt: Date;
  updatedAt: Date;
}
export const CalibrationChainEntity = new EntitySchema<CalibrationChainRow>({
  name: 'CalibrationChain',
  tableName: 'calibration_chain',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    name: { type: 'text' },
    instituteId: { name: 'institute_id', type: 'uuid' },
    transportableClockId: { name: 'transportable_clock_id', type: 'uuid' },
    referenceClockId: { name: 'reference_clock_id', type: 'uuid' },
    remoteCampaignId: { name: 'remote_campaign_id', type: 'uuid' },
    beforeCampaignId: { name: 'before_campaign_id', type: 'uuid', nullable: true },
    afterCampaignId: { name: 'after_campaign_id', type: 'uuid', nullable: true },
    transportReproducibility: { name: 'transport_reproducibility', type: 'float8', nullable: true },
    transportReproducibilitySource: { name: 'transport_reproducibility_source', type: 'text', nullable: true },
    notes: { type: 'text', default: '' },
    createdByUserId: { name: 'created_by_user_id', type: 'uuid', nullable: true },
    createdBy: { name: 'created_by', type: 'text' },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
    updatedAt: { name: 'updated_at', type: 'timestamptz', updateDate: true },
  },
});

export const registryEntities = [SiteEntity, QuasigeoidGridEntity, ClockEntity, ClockBudgetVersionEntity, ClockDeploymentEntity, CalibrationChainEntity, ReferenceFrequencyEntity, FibreLinkEntity, CampaignEntity, CampaignEventEntity];
