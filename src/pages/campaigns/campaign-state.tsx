import { campaignStateLabels, type CampaignState } from '../../../shared/campaigns';

// State badge: text always carries the meaning; colour only supports it.
const styles: Record<CampaignState, string> = {
  draft: 'bg-paper-100 text-ink-700 border-ink-200',
  submitted: 'bg-brass-300/40 text-ink-800 border-brass-500',
  in_review: 'bg-brass-300/70 text-ink-900 border-brass-600',
  accepted: 'bg-agree-100 text-agree-800 border-agree-600',
  returned: 'bg-disagree-100 text-disagree-800 border-disagree-600',
  certified: 'bg-ink-700 text-paper-50 border-ink-800',
};

export function CampaignStateBadge({ state }: { state: CampaignState }) {
  return <span className={`inline-block rounded-full border px-2 py-0.5 text-xs font-medium ${styles[state]}`} data-testid="campaign-state">{campaignStateLabels[state]}</span>;
}
