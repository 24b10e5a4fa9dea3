import { useCampaignClosures } from '../../api/closures';
import { Panel } from '../../components/ui';
import { ClosuresTable } from './closures-table';

/** The clock-ratio closures a campaign is part of (campaign page). */
export function CampaignClosuresPanel({ campaignId }: { campaignId: string }) {
  const q = useCampaignClosures(campaignId);
  return (
    <Panel title="Clock-ratio closures">
      {q.data && q.data.length === 0 && <p className="text-sm text-ink-600">This campaign is not part of any loop of simultaneous comparisons you can see.</p>}
      {q.data && q.data.length > 0 && <ClosuresTable items={q.data} />}
    </Panel>
  );
}
