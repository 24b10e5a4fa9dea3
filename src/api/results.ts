import { useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { ComparisonResultDto } from '../../shared/results';
import { api } from '../lib/api-client';

export const resultKeys = {
  all: ['results'] as const,
  campaign: (campaignId: string) => [...resultKeys.all, 'campaign', campaignId] as const,
};

/** The campaign's current result; the server recomputes it when its inputs changed (can take a few seconds). */
export const useCampaignResult = (campaignId: string) =>
  useQuery({ queryKey: resultKeys.campaign(campaignId), queryFn: () => api<ComparisonResultDto>(`/api/v1/campaigns/${campaignId}/result`), retry: false });

export function useRecomputeResult(campaignId: string) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: () => api<ComparisonResultDto>(`/api/v1/campaigns/${campaignId}/result/recompute`, { method: 'POST' }),
    onSuccess: (data) => qc.setQueryData(resultKeys.campaign(campaignId), data),
  });
}

export const resultCsvUrl = (campaignId: string) => `/api/v1/campaigns/${campaignId}/result.csv`;
