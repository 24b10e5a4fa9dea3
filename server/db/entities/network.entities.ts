import { EntitySchema } from 'typeorm';

// Levelling network tables (migration 1764690000000-network).

export interface HeightDatumRow {
  id: string;
  name: string;
  tideSystem: 'mean-tide' | 'zero-tide' | 'tide-free';
  realisationEpoch: string | null;
  loopToleranceMmPerSqrtKm: number;
  sectionToleranceMmPerSqrtKm: number;
  notes: string | null;
  createdAt: Date;
}
export const HeightDatumEntity = new EntitySchema<HeightDatumRow>({
  name: 'HeightDatum',
  tableName: 'height_datum',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    name: { type: 'text', unique: true },
    tideSystem: { name: 'tide_system', type: 'text' },
    realisationEpoch: { name: 'realisation_epoch', type: 'text', nullable: true },
    loopToleranceMmPerSqrtKm: { name: 'loop_tolerance_mm_per_sqrt_km', type: 'double precision' },
    sectionToleranceMmPerSqrtKm: { name: 'section_tolerance_mm_per_sqrt_km', type: 'double precision' },
    notes: { type: 'text', nullable: true },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
  },
});

export interface BenchmarkRow {
  id: string;
  code: string;
  name: string;
  datumId: string;
  datum?: HeightDatumRow;
  crs: string;
  coordinatesEntered: number[];
  latitudeDeg: number;
  longitudeDeg: number;
  ellipsoidalHeightM: number;
  knownEnteredAs: 'C' | 'H' | null;
  knownC_m2s2: number | null;
  knownNormalHeightM: number | null;
  knownUncertaintyC_m2s2: number | null;
  /** Tide system the known value is stated in (null: not stated). */
  knownTideSystem?: 'mean-tide' | 'zero-tide' | 'tide-free' | null;
  fixed: boolean;
  monumentation: string | null;
  state: 'in-use' | 'destroyed';
  createdAt: Date;
  updatedAt: Date;
}
export const BenchmarkEntity = new EntitySchema<BenchmarkRow>({
  name: 'Benchmark',
  tableName: 'benchmark',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    code: { type: 'text', unique: true },
    name: { type: 'text' },
    datumId: { name: 'datum_id', type: 'uuid' },
    crs: { type: 'text' },
    coordinatesEntered: { name: 'coordinates_entered', type: 'jsonb' },
    latitudeDeg: { name: 'latitude_deg', type: 'double precision' },
    longitudeDeg: { name: 'longitude_deg', type: 'double precision' },
    ellipsoidalHeightM: { name: 'ellipsoidal_height_m', type: 'double precision' },
    knownEnteredAs: { name: 'known_entered_as', type: 'text', nullable: true },
    knownC_m2s2: { name: 'known_c_m2s2', type: 'double precision', nullable: true },
    knownNormalHeightM: { name: 'known_normal_height_m', type: 'double precision', nullable: true },
    knownUncertaintyC_m2s2: { name: 'known_uncertainty_c_m2s2', type: 'double precision', nullable: true },
    knownTideSystem: { name: 'known_tide_system', type: 'text', nullable: true },
    fixed: { type: 'boolean' },
    monumentation: { type: 'text', nullable: true },
    state: { type: 'text' },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
    updatedAt: { name: 'updated_at', type: 'timestamptz', updateDate: true },
  },
  relations: {
    datum: { type: 'many-to-one', target: 'HeightDatum', joinColumn: { name: 'datum_id' } },
  },
});

export interface LevellingSectionRow {
  id: string;
  lineName: string | null;
  fromBenchmarkId: string;
  toBenchmarkId: string;
  fromBenchmark?: BenchmarkRow;
  toBenchmark?: BenchmarkRow;
  deltaHeightM: number;
  lengthKm: number;
  meanGravity_ms2: number;
  gravityFromNormal: boolean;
  observedOn: string | null;
  forwardM: number | null;
  backwardM: number | null;
  uploadSha256: string | null;
  createdAt: Date;
}
export const LevellingSectionEntity = new EntitySchema<LevellingSectionRow>({
  name: 'LevellingSection',
  tableName: 'levelling_section',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    lineName: { name: 'line_name', type: 'text', nullable: true },
    fromBenchmarkId: { name: 'from_benchmark_id', type: 'uuid' },
    toBenchmarkId: { name: 'to_benchmark_id', type: 'uuid' },
    deltaHeightM: { name: 'delta_height_m', type: 'double precision' },
    lengthKm: { name: 'length_km', type: 'double precision' },
    meanGravity_ms2: { name: 'mean_gravity_ms2', type: 'double precision' },
    gravityFromNormal: { name: 'gravity_from_normal', type: 'boolean' },
    observedOn: { name: 'observed_on', type: 'date', nullable: true },
    forwardM: { name: 'forward_m', type: 'double precision', nullable: true },
    backwardM: { name: 'backward_m', type: 'double precision', nullable: true },
    uploadSha256: { name: 'upload_sha256', type: 'text', nullable: true },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
  },
  relations: {
    fromBenchmark: { type: 'many-to-one', target: 'Benchmark', joinColumn: { name: 'from_benchmark_id' } },
    toBenchmark: { type: 'many-to-one', target: 'Benchmark', joinColumn: { name: 'to_benchmark_id' } },
  },
});

export interface AdjustmentRunRow {
  id: string;
  state: 'queued' | 'running' | 'done' | 'failed';
  progress: number;
  stage: string | null;
  options: Record<string, unknown>;
  inputs: Record<string, unknown>;
  inputSummary: Record<string, unknown>;
  result: Record<string, unknown> | null;
  error: Record<string, unknown> | null;
  sigma0: number | null;
  degreesOfFreedom: number | null;
  globalTestPassed: boolean | null;
  suspects: number | null;
  createdBy: string | null;
  createdAt: Date;
  startedAt: Date | null;
  finishedAt: Date | null;
}
export const AdjustmentRunEntity = new EntitySchema<AdjustmentRunRow>({
  name: 'AdjustmentRun',
  tableName: 'adjustment_run',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    state: { type: 'text' },
    progress: { type: 'double precision' },
    stage: { type: 'text', nullable: true },
    options: { type: 'jsonb' },
    inputs: { type: 'jsonb' },
    inputSummary: { name: 'input_summary', type: 'jsonb' },
    result: { type: 'jsonb', nullable: true },
    error: { type: 'jsonb', nullable: true },
    sigma0: { type: 'double precision', nullable: true },
    degreesOfFreedom: { name: 'degrees_of_freedom', type: 'integer', nullable: true },
    globalTestPassed: { name: 'global_test_passed', type: 'boolean', nullable: true },
    suspects: { type: 'integer', nullable: true },
    createdBy: { name: 'created_by', type: 'uuid', nullable: true },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
    startedAt: { name: 'started_at', type: 'timestamptz', nullable: true },
    finishedAt: { name: 'finished_at', type: 'timestamptz', nullable: true },
  },
});

export const networkEntities = [HeightDatumEntity, BenchmarkEntity, LevellingSectionEntity, AdjustmentRunEntity];
