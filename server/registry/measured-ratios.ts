import Decimal from 'decimal.js';
import type { DataSource, EntityManager } from 'typeorm';
import { measuredRatioInput, measuredRatioSchema, type MeasuredRatio, type MeasuredRatioChoice, type MeasuredRatioInput } from '../../shared/measured-ratios';
import { speciesLabels, type SpeciesCode } from '../../shared/registry';
import { pageOf, wholePage } from '../../shared/http';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import { MeasuredRatioEntity, type MeasuredRatioRow } from '../db/entities/measured-ratio.entity';
import { Invalid, NotFound } from '../http/errors';
import { route } from '../http/route';

// Measured optical frequency ratios (reference data) and their use as a campaign's reference ratio. Entries are
// added by coordinators, never edited (campaigns copy what they use); a campaign takes one only when its lab chooses it.

function toDto(r: MeasuredRatioRow): MeasuredRatio {
  return {
    id: r.id, numeratorSpecies: r.numeratorSpecies, denominatorSpecies: r.denominatorSpecies,
    label: `ν(${speciesLabels[r.numeratorSpecies]}) / ν(${speciesLabels[r.denominatorSpecies]})`,
    value: r.value, relativeUncertainty: r.relativeUncertainty, source: r.source, createdAt: r.createdAt.toISOString(),
  };
}

export function createMeasuredRatioService(dataSource: DataSource) {
  return {
    async list(actor: Actor): Promise<MeasuredRatio[]> {
      authorize(actor, 'registry:read');
      const rows = await dataSource.getRepository(MeasuredRatioEntity).find({ order: { numeratorSpecies: 'ASC', denominatorSpecies: 'ASC', createdAt: 'DESC' } });
      return rows.map(toDto);
    },
    async create(actor: Actor, input: MeasuredRatioInput): Promise<MeasuredRatio> {
      authorize(actor, 'references:write');
      const body = measuredRatioInput.parse(input);
      return dataSource.transaction(async (m) => {
        const repo = m.getRepository(MeasuredRatioEntity);
        const saved = await repo.save(repo.create(body));
        await recordAudit(m, actor, { action: 'measured-ratio.created', entityType: 'measured-ratio', entityId: saved.id, details: { ...body } });
        return toDto(saved);
      });
    },
  };
}

/**
 * The campaign's reference ratio ν_B/ν_A from a registered measured ratio: as published when registered as
 * ν(B)/ν(A), its reciprocal (40 significant digits, same relative uncertainty) when registered as ν(A)/ν(B).
 */
export async function ratioFromMeasured(m: EntityManager, choice: MeasuredRatioChoice, speciesA: SpeciesCode, speciesB: SpeciesCode) {
  const r = await m.getRepository(MeasuredRatioEntity).findOneBy({ id: choice.measuredRatioId });
  if (!r) throw new NotFound('Measured frequency ratio');
  let value: string;
  let orientation: string;
  if (r.numeratorSpecies === speciesB && r.denominatorSpecies === speciesA) {
    value = r.value;
    orientation = 'as published';
  } else if (r.numeratorSpecies === speciesA && r.denominatorSpecies === speciesB) {
    value = new (Decimal.clone({ precision: 60 }))(1).div(r.value).toSignificantDigits(40).toFixed();
    orientation = `reciprocal of the published ν(${speciesLabels[speciesA]})/ν(${speciesLabels[speciesB]}) = ${r.value}`;
  } else {
    throw new Invalid('The measured ratio is for another pair of species than clocks A and B.', [
      { path: 'body.referenceRatio.measuredRatioId', message: `is ${toDto(r).label}; this campaign needs ν(${speciesLabels[speciesB]}) / ν(${speciesLabels[speciesA]})` },
    ]);
  }
  return {
    referenceRatio: value,
    referenceRatioRelativeUncertainty: r.relativeUncertainty,
    referenceRatioSource: `directly measured optical frequency ratio ν(${speciesLabels[speciesB]})/ν(${speciesLabels[speciesA]}), ${orientation}, relative standard uncertainty ${r.relativeUncertainty}; published: ${r.source}`,
    referenceRatioJustification: choice.justification,
  };
}

const svc = (ds: DataSource) => createMeasuredRatioService(ds);

export const measuredRatioRoutes = [
  route({
    method: 'get', path: '/api/v1/measured-frequency-ratios', summary: 'Directly measured optical frequency ratios (reference data)', tag: 'registry',
    permission: 'registry:read', response: pageOf(measuredRatioSchema),
    handler: async ({ actor, deps }) => wholePage(await svc(deps.dataSource).list(actor)),
  }),
  route({
    method: 'post', path: '/api/v1/measured-frequency-ratios', summary: 'Register a directly measured optical frequency ratio with its publication', tag: 'registry',
    permission: 'references:write', body: measuredRatioInput, response: measuredRatioSchema, successStatus: 201,
    handler: ({ actor, body, deps }) => svc(deps.dataSource).create(actor, body),
  }),
];
