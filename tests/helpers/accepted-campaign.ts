import request from 'supertest';
import { reviewChecklistItems } from '../../shared/campaigns';
import { tokenFor, type TestApp } from './test-app';

/**
 * An accepted campaign made through the product's own API, as a lab and the coordinator would: SCL-Sr1 against
 * HMO-Sr2 over the long-haul link (registry demo seed), one uploaded series of invented fractional offsets, submitted,
 * reviewed and accepted. The offsets are made up (≈ 6.55e-14, the order of a 600 m height difference, g/c² ≈ 1.09e-16
 * per metre); the certificate only has to carry whatever the result says.
 */
export async function acceptedCampaign(t: TestApp, name: string, startIso: string): Promise<string> {
  const campaign = await campaignInReview(t, name, startIso);
  await acceptAsReviewer(t, campaign, await tokenFor(t, 'ansel.brandt@geopotential-office.invalid'));
  return campaign;
}

/** The same campaign, uploaded, submitted and under review (not yet accepted). */
export async function campaignInReview(t: TestApp, name: string, startIso: string): Promise<string> {
  const operator = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  const coordinator = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  const id = async (sql: string, v: string) => ((await t.ds.query(sql, [v]))[0] as { id: string }).id;
  const clockAId = await id(`SELECT id FROM clock WHERE name = $1`, 'SCL-Sr1');
  const clockBId = await id(`SELECT id FROM clock WHERE name = $1`, 'HMO-Sr2');
  const linkId = await id(`SELECT id FROM fibre_link WHERE name = $1`, 'SCL–HMO long-haul');
  const start = Date.parse(startIso);
  const days = 2;
  const created = await request(t.app).post('/api/v1/campaigns').set('authorization', `Bearer ${operator}`)
    .send({ name, clockAId, clockBId, linkId, periodStart: new Date(start).toISOString(), periodEnd: new Date(start + days * 86_400_000).toISOString() });
  if (created.status !== 201) throw new Error(`campaign not created: ${created.status} ${created.text}`);
  const campaign = created.body.id as string;
  let seed = 20260801;
  const uniform = () => ((seed = (seed * 16807) % 2147483647) / 2147483647);
  const rows = ['mjd,y'];
  const mjd0 = 40587 + start / 86_400_000; // MJD of the Unix epoch is 40587 (common practice)
  for (let i = 0; i < (days * 86_400) / 20; i++) {
    const y = 6.5492e-14 + (uniform() + uniform() + uniform() - 1.5) * 8e-16;
    rows.push(`${(mjd0 + (i * 20 + 10) / 86_400).toFixed(8)},${y.toExponential(6)}`);
  }
  const upload = await request(t.app).post(`/api/v1/campaigns/${campaign}/uploads`).set('authorization', `Bearer ${operator}`)
    .field('epochColumn', '1').field('epochKind', 'mjd').field('valueColumn', '2').field('valueKind', 'offset').field('hasHeader', 'true')
    .attach('file', Buffer.from(rows.join('\n') + '\n'), { filename: `${name.replace(/\W+/g, '-')}.csv`, contentType: 'text/csv' });
  if (upload.status !== 201) throw new Error(`upload refused: ${upload.status} ${upload.text}`);
  for (const [who, step] of [[operator, 'submit'], [coordinator, 'start-review']] as const) {
    const res = await request(t.app).post(`/api/v1/campaigns/${campaign}/${step}`).set('authorization', `Bearer ${who}`).send({});
    if (res.status >= 300) throw new Error(`${step} refused: ${res.status} ${res.text}`);
  }
  return campaign;
}

/** The reviewer's part: tick every checklist item, then accept with a comment (and a justification, used only if the campaign needs one). */
export async function acceptAsReviewer(t: TestApp, campaign: string, coordinatorToken: string, body: { comment?: string; justification?: string } = {}) {
  for (const item of reviewChecklistItems) {
    const res = await request(t.app).post(`/api/v1/campaigns/${campaign}/checklist`).set('authorization', `Bearer ${coordinatorToken}`).send({ item, checked: true });
    if (res.status !== 200) throw new Error(`checklist refused: ${res.status} ${res.text}`);
  }
  const res = await request(t.app).post(`/api/v1/campaigns/${campaign}/accept`).set('authorization', `Bearer ${coordinatorToken}`)
    .send({ comment: 'Reviewed: budgets, ratio and series checked.', justification: 'Test campaign: exceptions accepted for the test.', ...body });
  if (res.status !== 200) throw new Error(`accept refused: ${res.status} ${res.text}`);
  return res;
}
