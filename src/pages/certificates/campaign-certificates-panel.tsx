import { Link } from 'react-router';
import type { ReviewException } from '../../../shared/campaigns';
import { useMe } from '../../api/account';
import { useCampaignCertificates } from '../../api/certificates';
import { Panel } from '../../components/ui';
import { IssueCertificateButton } from './certificate-actions';
import { CertificateStateBadge } from './certificate-state';

/** The certificates of one campaign, with the coordinator's Issue action when the campaign is accepted. */
export function CampaignCertificatesPanel({ campaignId, campaignState, exceptions, fourEyes, resultComputed }: { campaignId: string; campaignState?: string; exceptions?: ReviewException[]; fourEyes?: boolean; resultComputed?: boolean }) {
  const me = useMe();
  const list = useCampaignCertificates(campaignId);
  const items = list.data?.items ?? [];
  const hasValid = items.some((c) => c.state === 'valid');
  const canIssue = me.data?.role === 'coordinator' && !hasValid && (campaignState === undefined || campaignState === 'accepted' || campaignState === 'certified');
  return (
    <Panel title="Certificates" actions={canIssue ? <IssueCertificateButton campaignId={campaignId} exceptions={exceptions} fourEyes={fourEyes} resultComputed={resultComputed} /> : undefined}>
      {items.length === 0 ? (
        <p className="text-sm text-ink-500">{list.isPending ? 'Loading…' : 'No certificate has been issued for this campaign.'}</p>
      ) : (
        <ul className="divide-y divide-paper-200 text-sm">
          {items.map((c) => (
            <li key={c.id} className="flex flex-wrap items-center gap-3 py-2">
              <Link to={`/certificates/${c.number}`} className="font-mono">{c.number}</Link>
              <CertificateStateBadge state={c.state} />
              <span className="text-ink-500">issued {c.issuedAt.slice(0, 10)}</span>
              {c.revocationReason && <span className="text-xs text-disagree-800">reason: {c.revocationReason}</span>}
            </li>
          ))}
        </ul>
      )}
    </Panel>
  );
}
