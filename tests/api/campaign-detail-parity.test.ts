import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Actor } from '../../server/auth/actor';
import { canSeeCampaign } from '../../server/auth/campaign-scope';
import { closureExceptions } from '../../server/closures/closures.service';
import { reviewExceptions } from '../../server/campaigns/review-rules';
import { UserEntity } from '../../server/db/entities/core.entities';
import { CampaignEntity, CampaignEventEntity, ClockBudgetVersionEntity } from '../../server/db/entities/registry.entities';
import { toBudgetDto } from '../../server/registry/registry.service';
import { latestResultForCampaign } from '../../server/results/results.service';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// The detail route reads a campaign in one statement of sub-selects that build JSON in PostgreSQL
// (server/campaigns/campaigns.service.ts). Its answer must be what the entities and the review rules give when
// read the plain way: the campaign with its relations, the budget versions, the timeline in id order, and the review
// exceptions of the newest stored result (whole body) and of the failing closures the caller may see. Every campaign
// of the demo, for every role; a campaign the caller may not see stays 404.

let t: TestApp;
const people = {
  coord: 'ansel.brandt@geopotential-office.invalid',
  auditor: 'petra.lind@audit-bureau.invalid',
  scl: 'ines.varga@saltmarsh-lab.invalid',
  hmo: 'mira.ostrowe@highridge-obs.invalid',
};
type Who = keyof typeof people;
const tok = new Map<Who, string>();
const actors = new Map<Who, Actor>();

beforeAll(async () => {
  t = await createTestApp();
  for (const [k, email] of Object.entries(people) as [Who, string][]) {
    tok.set(k, await tokenFor(t, email));
    const u = await t.ds.getRepository(UserEntity).findOneByOrFail({ email });
    actors.set(k, { userId: u.id, email: u.email, displayName: u.displayName, role: u.role, instituteId: u.instituteId, via: 'token' });
  }
  // A failing copy of every stored closure (same loop members), so the detail has a closure exception to show.
  await t.ds.query(`INSERT INTO ratio_closure (loop_key, input_hash, label, common_start, common_end, closure, standard_uncertainty, expanded_uncertainty, coverage_factor, en, agreed, computed_at, software_version, body)
                    SELECT loop_key || '-failing', input_hash, label || ' (failing copy)', common_start, common_end, closure * 3.7, standard_uncertainty, expanded_uncertainty / 7,
                           coverage_factor, -2.345678, false, now(), software_version, body FROM ratio_closure`);
  await t.ds.query(`INSERT INTO ratio_closure_campaign (closure_id, campaign_id, position, sign)
                    SELECT n.id, m.campaign_id, m.position, m.sign FROM ratio_closure n JOIN ratio_closure o ON n.loop_key = o.loop_key || '-failing'
                      JOIN ratio_closure_campaign m ON m.closure_id = o.id`);
  // Timeline entries with microseconds (the driver keeps milliseconds) and text that JSON must escape.
  await t.ds.query(`INSERT INTO campaign_event (campaign_id, from_state, to_state, actor_label, note, at)
                    SELECT id, state, state, 'Zoë "Q" \\ tab	end', E'line\\nnext ✓', '2026-01-01 00:00:00.029999+00' FROM campaign`);
  await t.ds.query(`UPDATE campaign SET review_checklist = '{"tideSystem": {"by": "Ansel Brandt", "at": "2026-11-02T10:11:12.345Z"}}' WHERE state = 'in_review'`);
});
afterAll(() => t.close());

const get = (who: Who, url: string) => request(t.app).get(url).set('authorization', `Bearer ${tok.get(who)}`);

describe('campaign detail against the plainly read campaign', () => {
  it.each(Object.keys(people) as Who[])('%s: every campaign of the demo', async (who) => {
    const actor = actors.get(who)!;
    const campaigns = await t.ds.getRepository(CampaignEntity).find({
      relations: { institute: true, siteA: true, siteB: true, link: true, clockA: { site: true, institute: true }, clockB: { site: true, institute: true } },
      order: { id: 'ASC' },
    });
    expect(campaigns.length).toBeGreaterThan(3);
    let seen = 0;
    let withResult = 0;
    let withFailingClosure = 0;
    for (const c of campaigns) {
      const res = await get(who, `/api/v1/campaigns/${c.id}`);
      if (!canSeeCampaign(actor, { state: c.state, instituteId: c.instituteId, partnerInstituteId: c.clockB!.instituteId })) {
        expect(res.status, c.name).toBe(404);
        continue;
      }
      expect(res.status, c.name).toBe(200);
      seen++;
      const d = res.body;
      const clock = (k: NonNullable<typeof c.clockA>) => ({
        id: k.id, name: k.name, species: k.species, speciesLabel: expect.any(String), nominalFrequencyHz: k.nominalFrequencyHz,
        site: { id: k.siteId, name: k.site!.name }, institute: { id: k.instituteId, code: k.institute!.code },
      });
      expect(d).toMatchObject({
        id: c.id, name: c.name, state: c.state, institute: { id: c.instituteId, code: c.institute!.code },
        clockA: clock(c.clockA!), clockB: clock(c.clockB!), link: { id: c.linkId, name: c.link!.name },
        periodStart: c.periodStart.toISOString(), periodEnd: c.periodEnd.toISOString(), role: c.role,
        siteA: { id: c.siteAId, name: c.siteA!.name }, siteB: { id: c.siteBId, name: c.siteB!.name }, updatedAt: c.updatedAt.toISOString(),
        operatorNotes: c.operatorNotes, createdAt: c.createdAt.toISOString(), createdBy: c.createdBy, returnReason: c.returnReason,
        referenceRatio: { value: c.referenceRatio, relativeUncertainty: c.referenceRatioRelativeUncertainty, source: c.referenceRatioSource, justification: c.referenceRatioJustification },
        currentBudgetVersionA: c.clockA!.currentBudgetVersion,
        currentBudgetVersionB: c.clockB!.currentBudgetVersion,
      });
      const versions = t.ds.getRepository(ClockBudgetVersionEntity);
      expect(d.budgetA).toEqual(toBudgetDto(await versions.findOneByOrFail({ id: c.budgetVersionAId })));
      expect(d.budgetB).toEqual(toBudgetDto(await versions.findOneByOrFail({ id: c.budgetVersionBId })));
      const events = await t.ds.getRepository(CampaignEventEntity).find({ where: { campaignId: c.id }, order: { id: 'ASC' } });
      expect(events.length).toBeGreaterThan(0);
      expect(d.timeline).toEqual(events.map((e) => ({ at: e.at.toISOString(), fromState: e.fromState, toState: e.toState, actor: e.actorLabel, note: e.note })));
      expect(d.review.checklist.filter((i: { checked: boolean }) => i.checked).map((i: { item: string }) => i.item)).toEqual(
        Object.keys(c.reviewChecklist ?? {}).sort(),
      );
      const latest = await latestResultForCampaign(t.ds.manager, c.id);
      const closures = await closureExceptions(t.ds.manager, actor, c.id);
      expect(d.review.resultComputed).toBe(latest !== null);
      expect(d.review.exceptions).toEqual(latest ? reviewExceptions(latest.result, t.config.reviewMinUptimeFraction, undefined, closures) : closures);
      if (latest) withResult++;
      if (closures.length) withFailingClosure++;
    }
    expect(seen).toBeGreaterThan(0);
    // The auditor sees the accepted campaigns with stored results; the coordinator also every campaign of the failing loop.
    if (who === 'coord' || who === 'auditor') expect(withResult).toBeGreaterThan(0);
    if (who === 'coord') expect(withFailingClosure).toBeGreaterThan(0);
  });
});
