import { keepPreviousData, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { Campaign, CampaignState, CampaignSummary, CreateCampaign, ReviewChecklistItem, UpdateCampaign } from '../../shared/campaigns';
import type { Page } from '../../shared/http';
import { api } from '../lib/api-client';
import { queryString } from './registry';

export type CampaignListParams = { page: number; pageSize: number; sort?: string; order: 'asc' | 'desc'; q: string; state?: CampaignState };

export const campaignKeys = {
  all: ['campaigns'] as const,
  list: (p: CampaignListParams) => [...campaignKeys.all, 'list', p] as const,
  detail: (id: string) => [...campaignKeys.all, 'detail', id] as const,
  defaultRatio: (a: string, b: string) => [...campaignKeys.all, 'default-ratio', a, b] as const,
};

export const useCampaigns = (p: CampaignListParams) =>
  useQuery({ queryKey: campaignKeys.list(p), queryFn: () => api<Page<CampaignSummary>>(`/api/v1/campaigns?${queryString(p)}`), placeholderData: keepPreviousData });
export const useCampaign = (id: string) => useQuery({ queryKey: campaignKeys.detail(id), queryFn: () => api<Campaign>(`/api/v1/campaigns/${id}`) });
export const useDefaultRatio = (clockAId: string, clockBId: string) =>
  useQuery({
    queryKey: campaignKeys.defaultRatio(clockAId, clockBId),
    queryFn: () => api<{ value: string; relativeUncertainty: number; source: string }>(`/api/v1/campaigns/default-reference-ratio?${queryString({ clockAId, clockBId })}`),
    enabled: !!clockAId && !!clockBId && clockAId !== clockBId,
    retry: false,
  });

function useCampaignMutation<TIn, TOut>(fn: (input: TIn) => Promise<TOut>) {
  const qc = useQueryClient();
  return useMutation({ mutationFn: fn, onSuccess: () => qc.invalidateQueries({ queryKey: campaignKeys.all }) });
}
export const useCreateCampaign = () => useCampaignMutation((body: CreateCampaign) => api<Campaign>('/api/v1/campaigns', { body }));
export const useUpdateCampaign = () => useCampaignMutation(({ id, body }: { id: string; body: UpdateCampaign }) => api<Campaign>(`/api/v1/campaigns/${id}`, { method: 'PATCH', body }));
export type CampaignAction = 'submit' | 'start-review' | 'accept' | 'return';
export type CampaignActionInput = { id: string; action: CampaignAction; reason?: string; note?: string; comment?: string; justification?: string };
function actionBody(v: CampaignActionInput): Record<string, string> {
  if (v.action === 'return') return { reason: v.reason ?? '' };
  if (v.action === 'accept') return { comment: v.comment ?? '', ...(v.justification ? { justification: v.justification } : {}) };
  return v.note ? { note: v.note } : {};
}
export const useCampaignAction = () =>
  useCampaignMutation((v: CampaignActionInput) => api<Campaign>(`/api/v1/campaigns/${v.id}/${v.action}`, { body: actionBody(v) }));
export const useTickChecklist = () =>
  useCampaignMutation(({ id, item, checked }: { id: string; item: ReviewChecklistItem; checked: boolean }) =>
    api<Campaign>(`/api/v1/campaigns/${id}/checklist`, { body: { item, checked } }));
