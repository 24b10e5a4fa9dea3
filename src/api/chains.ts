import { keepPreviousData, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { Chain, ChainCandidates, ChainResult, CreateChain } from '../../shared/chains';
import type { Page } from '../../shared/http';
import { api } from '../lib/api-client';
import { queryString } from './registry';

export type ChainListParams = { page: number; pageSize: number; sort?: string; order: 'asc' | 'desc'; q: string };

export const chainKeys = {
  all: ['chains'] as const,
  list: (p: ChainListParams) => [...chainKeys.all, 'list', p] as const,
  detail: (id: string) => [...chainKeys.all, 'detail', id] as const,
  result: (id: string) => [...chainKeys.all, 'result', id] as const,
  candidates: () => [...chainKeys.all, 'candidates'] as const,
};

export const useChains = (p: ChainListParams) =>
  useQuery({ queryKey: chainKeys.list(p), queryFn: () => api<Page<Chain>>(`/api/v1/chains?${queryString(p)}`), placeholderData: keepPreviousData });
export const useChain = (id: string) => useQuery({ queryKey: chainKeys.detail(id), queryFn: () => api<Chain>(`/api/v1/chains/${id}`) });
export const useChainResult = (id: string) => useQuery({ queryKey: chainKeys.result(id), queryFn: () => api<ChainResult>(`/api/v1/chains/${id}/result`), retry: false });
export const useChainCandidates = (enabled: boolean) => useQuery({ queryKey: chainKeys.candidates(), queryFn: () => api<ChainCandidates>('/api/v1/chains/candidates'), enabled });

export function useCreateChain() {
  const qc = useQueryClient();
  return useMutation({ mutationFn: (body: CreateChain) => api<Chain>('/api/v1/chains', { body }), onSuccess: () => qc.invalidateQueries({ queryKey: chainKeys.all }) });
}
export function useDeleteChain() {
  const qc = useQueryClient();
  return useMutation({ mutationFn: (id: string) => api<void>(`/api/v1/chains/${id}`, { method: 'DELETE' }), onSuccess: () => qc.invalidateQueries({ queryKey: chainKeys.all }) });
}
