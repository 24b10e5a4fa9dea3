import type { ReactNode } from 'react';
import { Link, useParams } from 'react-router';
import { campaignStateLabels, type CampaignState } from '../../../shared/campaigns';
import { useCampaign } from '../../api/campaigns';
import { useCampaignAuditTrail } from '../../api/certificates';
import { EmptyState, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { CampaignCertificatesPanel } from '../certificates/campaign-certificates-panel';
import { sci } from '../registry/registry-ui';
import { typeset } from '../../components/typeset';

// The campaign's audit trail as a timeline: its own events and those of its certificates, oldest first.

const actionLabels: Record<string, string> = {
  'campaign.created': 'Campaign opened',
  'campaign.updated': 'Campaign changed',
  'campaign.series-uploaded': 'Ratio series uploaded',
  'campaign.checklist-ticked': 'Checklist item ticked',
  'campaign.checklist-unticked': 'Checklist item unticked',
  'result.computed': 'Result computed',
  'certificate.issued': 'Certificate issued',
  'certificate.reissued': 'Certificate reissued',
  'certificate.superseded': 'Certificate replaced',
  'certificate.revoked': 'Certificate withdrawn',
};

function actionLabel(action: string, details: Record<string, unknown>): string {
  if (Object.hasOwn(actionLabels, action)) return actionLabels[action];
  const to = details?.to;
  if (action.startsWith('campaign.') && isState(to)) return `State changed to ${campaignStateLabels[to].toLowerCase()}`;
  const text = action.replace(/^[a-z]+\./, '').replace(/[-_.]/g, ' ');
  return text.charAt(0).toUpperCase() + text.slice(1);
}

const kindLabel = (entityType: string) => (entityType === 'ratio_series' ? 'upload' : entityType === 'certificate' ? 'certificate' : 'campaign');

/** Human labels for the detail fields the services record; unknown fields fall back to a spelled-out key. */
const detailLabels: Record<string, string> = {
  name: 'Name',
  clockA: 'Clock A',
  clockB: 'Clock B',
  referenceRatio: 'Reference ratio ν_B/ν_A',
  budgetVersionA: 'Budget version, clock A',
  budgetVersionB: 'Budget version, clock B',
  fileName: 'File',
  sha256: 'SHA-256 of the file',
  rows: 'Rows',
  valid: 'Valid rows',
  from: 'From',
  to: 'To',
  comment: 'Comment',
  justification: 'Justification',
  exceptions: 'Exceptions',
  justifications: 'Justifications',
  check: 'Checklist item',
  checked: 'Ticked',
  fromState: 'From',
  toState: 'To',
  note: 'Note',
  reason: 'Reason',
  changed: 'Changed',
  before: 'Before',
  after: 'After',
  resultId: 'Result record',
  inputHash: 'Input fingerprint (SHA-256)',
  forced: 'Recomputed on request',
  softwareVersion: 'Software version',
  y: 'Fractional offset y',
  uY: 'Standard uncertainty of y (k = 1)',
  pdfSha256: 'PDF fingerprint (SHA-256)',
  auditChainHead: 'Audit chain head at signing',
  supersedes: 'Replaces certificate',
  supersededBy: 'Replaced by certificate',
  linkId: 'Fibre link record',
  operatorNotes: 'Operator notes',
  periodStart: 'Period start',
  periodEnd: 'Period end',
};
const labelOrder = Object.keys(detailLabels);
/** Already shown by the page itself. */
const hiddenKeys = new Set(['campaignId', 'item']);

const spellOut = (key: string) => key.replace(/([a-z])([A-Z])/g, '$1 $2').replace(/^./, (c) => c.toUpperCase()).replace(/ ([A-Z])(?=[a-z])/g, (_, c: string) => ` ${c.toLowerCase()}`);
const labelOf = (key: string) => detailLabels[key] ?? spellOut(key);
const isState = (v: unknown): v is CampaignState => typeof v === 'string' && v in campaignStateLabels;

function valueOf(key: string, v: unknown): ReactNode {
  if (v === null || v === undefined || v === '') return '—';
  if (typeof v === 'boolean') return v ? 'yes' : 'no';
  if (typeof v === 'string' && (key === 'check' || key === 'justification' || key === 'comment')) return typeset(v);
  if (typeof v === 'number') return key === 'y' || key === 'uY' ? sci(v, 3) : String(v);
  if (key === 'justifications' && Array.isArray(v)) {
    return v.map((j: { stage?: string; by?: string; text?: string }) => `${j.stage ?? ''}${j.by ? ` (${j.by})` : ''}: ${j.text ?? ''}`).join(' · ');
  }
  if (Array.isArray(v)) return v.map((x) => (typeof x === 'string' ? (key === 'exceptions' ? x : labelOf(x)) : JSON.stringify(x))).join(key === 'exceptions' ? ' ' : ', ');
  if (typeof v === 'object') {
    const entries = Object.entries(v as Record<string, unknown>).filter(([, x]) => x !== undefined);
    return entries.length ? entries.map(([k, x]) => `${labelOf(k)}: ${typeof x === 'object' && x !== null ? JSON.stringify(x) : String(x)}`).join(' · ') : '—';
  }
  if (['from', 'to', 'fromState', 'toState'].includes(key) && isState(v)) return campaignStateLabels[v];
  if (/sha256|hash|chainhead/i.test(key)) return <span className="break-all font-mono">{String(v)}</span>;
  return String(v);
}

function Details({ details }: { details: Record<string, unknown> }) {
  // jsonb hands keys back in its own order (shortest first): put them in the reading order of detailLabels.
  const rank = (k: string) => (k in detailLabels ? labelOrder.indexOf(k) : labelOrder.length);
  const entries = Object.entries(details ?? {})
    .filter(([k, v]) => !hiddenKeys.has(k) && v !== undefined && !(k === 'note' && (v === null || v === details.comment)))
    .sort(([x], [y]) => rank(x) - rank(y));
  if (!entries.length) return null;
  return (
    <dl className="mt-1 grid grid-cols-[max-content_1fr] gap-x-4 gap-y-0.5 text-xs" data-testid="audit-details">
      {entries.map(([k, v]) => (
        <div key={k} className="contents">
          <dt className="text-ink-500">{typeset(labelOf(k))}</dt>
          <dd className="min-w-0 text-ink-700">{valueOf(k, v)}</dd>
        </div>
      ))}
    </dl>
  );
}

export function CampaignAuditPage() {
  const { id = '' } = useParams();
  const campaign = useCampaign(id);
  const trail = useCampaignAuditTrail(id);
  const name = campaign.data?.name ?? (campaign.isError ? 'campaign' : '…');
  return (
    <>
      <header>
        <p className="text-sm text-ink-500">
          <Link to="/campaigns">Campaigns</Link> / {campaign.data ? <Link to={`/campaigns/${id}`}>{campaign.data.name}</Link> : name} / audit trail
        </p>
        <h1>Audit trail: {name}</h1>
        {campaign.data && <p className="text-sm text-ink-500">{campaignStateLabels[campaign.data.state]} · {campaign.data.clockA.name} – {campaign.data.clockB.name}</p>}
        {campaign.isError && <p className="text-sm text-ink-500">{describeError(campaign.error)}</p>}
      </header>
      <CampaignCertificatesPanel campaignId={id} />
      <Panel title="Timeline">
        <p className="mb-3 text-xs text-ink-500">
          Every event of this campaign, its uploaded series and its certificates, numbered 1 to {trail.data?.length ?? '…'} in order. The chain entry under each is its
          place in the institution-wide audit chain, which also holds the events of other records, so those numbers skip.
        </p>
        {trail.isError && <EmptyState title="The trail cannot be shown">{describeError(trail.error)}</EmptyState>}
        {trail.data && trail.data.length === 0 && <EmptyState title="No events recorded for this campaign" />}
        <ol className="relative ml-3 border-l-2 border-ink-100" data-testid="audit-timeline">
          {trail.data?.map((e) => (
            <li key={e.id} className="relative mb-4 pl-5">
              <span aria-hidden className={`absolute -left-[7px] top-1.5 h-3 w-3 rounded-full border-2 border-white ${e.entityType === 'certificate' ? 'bg-brass-500' : 'bg-ink-500'}`} />
              <p className="text-sm">
                <span className="mr-2 inline-block min-w-8 rounded bg-paper-100 px-1.5 text-center font-mono text-xs text-ink-600" title="event number within this campaign">{e.seq}</span>
                <span className="font-medium">{actionLabel(e.action, e.details)}</span>
                <span className="text-ink-500"> · {e.entityType === 'certificate' ? <Link to={`/certificates/${e.entityId}`} className="font-mono">{e.entityId}</Link> : kindLabel(e.entityType)}</span>
              </p>
              <p className="text-xs text-ink-500">{e.at.replace('T', ' ').slice(0, 16)} UTC · {e.actorLabel}</p>
              <Details details={e.details} />
              <p className="font-mono text-[10px] text-ink-400" title="position and hash of this event in the institution-wide audit chain, which numbers the events of every record">chain entry {e.id} · {e.hash.slice(0, 16)}…</p>
            </li>
          ))}
        </ol>
      </Panel>
    </>
  );
}
