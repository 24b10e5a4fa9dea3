import { useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { MeasuredRatio, MeasuredRatioInput } from '../../shared/measured-ratios';
import type { Page } from '../../shared/http';
import { api } from '../lib/api-client';

export const measuredRatioKeys = { all: ['measured-ratios'] as const };

export const useMeasuredRatios = () => useQuery({ queryKey: measuredRatioKeys.all, queryFn: () => api<Page<MeasuredRatio>>('/api/v1/measured-frequency-ratios').then((p) => p.items) });

export function useCreateMeasuredRatio() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (body: MeasuredRatioInput) => api<MeasuredRatio>('/api/v1/measured-frequency-ratios', { body }),
    onSuccess: () => qc.invalidateQueries({ queryKey: measuredRatioKeys.all }),
  });
}
