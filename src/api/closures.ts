import { keepPreviousData, useQuery } from '@tanstack/react-query';
import type { ClosureDetail, ClosureSummary } from '../../shared/closures';
import type { Page } from '../../shared/http';
import { api } from '../lib/api-client';

export const closureKeys = {
  all: ['closures'] as const,
  list: (p: object) => [...closureKeys.all, 'list', p] as const,
  one: (id: string) => [...closureKeys.all, 'one', id] as const,
  ofCampaign: (id: string) => [...closureKeys.all, 'campaign', id] as const,
};

export function useClosures(p: { page: number; pageSize: number; failing?: 'true' | 'false' }) {
  const s = new URLSearchParams({ page: String(p.page), pageSize: String(p.pageSize), sort: 'commonStart', order: 'desc' });
  if (p.failing) s.set('failing', p.failing);
  return useQuery({ queryKey: closureKeys.list(p), queryFn: () => api<Page<ClosureSummary>>(`/api/v1/network/closures?${s}`), placeholderData: keepPreviousData });
}

export function useClosure(id: string) {
  return useQuery({ queryKey: closureKeys.one(id), queryFn: () => api<ClosureDetail>(`/api/v1/network/closures/${id}`) });
}

export function useCampaignClosures(campaignId: string) {
  return useQuery({ queryKey: closureKeys.ofCampaign(campaignId), queryFn: async () => (await api<Page<ClosureSummary>>(`/api/v1/campaigns/${campaignId}/closures`)).items });
}
