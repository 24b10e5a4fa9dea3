import { Link, useParams } from 'react-router';
import { useCampaignAuditTrail, useCampaignCertificates } from '../../api/certificates';
import { EmptyState, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { CampaignCertificatesPanel } from '../certificates/campaign-certificates-panel';

// The campaign's audit trail as a timeline: its own events and those of its certificates, oldest first.

function actionLabel(action: string): string {
  return action.replace(/^[a-z]+\./, '').replace(/[-_.]/g, ' ');
}

function detailLine(details: Record<string, unknown>): string | null {
  const keep = ['reason', 'note', 'supersedes', 'supersededBy', 'from', 'to', 'fromState', 'toState', 'pdfSha256'];
  const parts = keep.filter((k) => details[k] !== undefined && details[k] !== null).map((k) => `${k}: ${String(details[k])}`);
  return parts.length ? parts.join(' · ') : null;
}

export function CampaignAuditPage() {
  const { id = '' } = useParams();
  const certificates = useCampaignCertificates(id);
  const numbers = (certificates.data?.items ?? []).map((c) => c.number);
  const trail = useCampaignAuditTrail(id, numbers, certificates.isSuccess);
  return (
    <>
      <header>
        <p className="text-sm text-ink-500"><Link to="/certificates">Certificates</Link> / audit trail</p>
        <h1>Audit trail of the campaign</h1>
        <p className="font-mono text-xs text-ink-500">{id}</p>
      </header>
      <CampaignCertificatesPanel campaignId={id} />
      <Panel title="Timeline">
        {trail.isError && <EmptyState title="The trail cannot be shown">{describeError(trail.error)}</EmptyState>}
        {trail.data && trail.data.length === 0 && <EmptyState title="No events recorded for this campaign" />}
        <ol className="relative ml-3 border-l-2 border-ink-100" data-testid="audit-timeline">
          {trail.data?.map((e) => (
            <li key={e.id} className="relative mb-4 pl-5">
              <span aria-hidden className={`absolute -left-[7px] top-1.5 h-3 w-3 rounded-full border-2 border-white ${e.entityType === 'certificate' ? 'bg-brass-500' : 'bg-ink-500'}`} />
              <p className="text-sm">
                <span className="font-medium">{actionLabel(e.action)}</span>
                <span className="text-ink-500"> · {e.entityType === 'certificate' ? <Link to={`/certificates/${e.entityId}`} className="font-mono">{e.entityId}</Link> : 'campaign'}</span>
              </p>
              <p className="text-xs text-ink-500">{e.at.replace('T', ' ').slice(0, 19)} UTC · {e.actorLabel}</p>
              {detailLine(e.details) && <p className="mt-0.5 text-xs text-ink-700">{detailLine(e.details)}</p>}
              <p className="font-mono text-[10px] text-ink-400" title="hash of this event in the chain">#{e.id} · {e.hash.slice(0, 16)}…</p>
            </li>
          ))}
        </ol>
      </Panel>
    </>
  );
}
