import { useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { Problem } from '../../shared/http';
import { JOB_POLL_SECONDS, type JobProgress } from '../../shared/jobs';
import { resultNotReadyCodes, type ComparisonResultDto, type ResultRequest } from '../../shared/results';
import { ApiError, api } from '../lib/api-client';

export const resultKeys = {
  all: ['results'] as const,
  campaign: (campaignId: string) => [...resultKeys.all, 'campaign', campaignId] as const,
};

/** The stored result for the campaign's current inputs, or why there is none yet (being computed, failed, not asked for). */
export type CampaignResultState =
  | { kind: 'ready'; dto: ComparisonResultDto }
  | { kind: 'not-ready'; code: (typeof resultNotReadyCodes)[number]; problem: Problem };

const isNotReady = (e: unknown): e is ApiError => e instanceof ApiError && e.status === 404 && (resultNotReadyCodes as readonly string[]).includes(e.problem.code);

/** Results are computed by a job after an upload, acceptance or recompute; while one runs, this polls every few seconds. */
export const useCampaignResult = (campaignId: string) =>
  useQuery({
    queryKey: resultKeys.campaign(campaignId),
    queryFn: async (): Promise<CampaignResultState> => {
      try {
        return { kind: 'ready', dto: await api<ComparisonResultDto>(`/api/v1/campaigns/${campaignId}/result`) };
      } catch (e) {
        if (isNotReady(e)) return { kind: 'not-ready', code: e.problem.code as (typeof resultNotReadyCodes)[number], problem: e.problem };
        throw e;
      }
    },
    retry: false,
    refetchInterval: (query) => {
      const data = query.state.data;
      if (data?.kind !== 'not-ready' || data.code !== 'result-pending') return false;
      const seconds = Number((data.problem as { retryAfterSeconds?: number }).retryAfterSeconds ?? 2);
      return Math.max(1, seconds) * 1000;
    },
  });

/** The worker's stage and fraction for the campaign's result, polled every second while `enabled` (a computation is pending). */
export const useResultProgress = (campaignId: string, enabled: boolean) =>
  useQuery({
    queryKey: [...resultKeys.campaign(campaignId), 'progress'],
    queryFn: () => api<JobProgress>(`/api/v1/campaigns/${campaignId}/result/progress`),
    enabled,
    refetchInterval: enabled ? JOB_POLL_SECONDS * 1000 : false,
  });

export function useRecomputeResult(campaignId: string) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: () => api<ResultRequest>(`/api/v1/campaigns/${campaignId}/result/recompute`, { method: 'POST' }),
    onSuccess: () => qc.invalidateQueries({ queryKey: resultKeys.campaign(campaignId) }),
  });
}

export const resultCsvUrl = (campaignId: string) => `/api/v1/campaigns/${campaignId}/result.csv`;
