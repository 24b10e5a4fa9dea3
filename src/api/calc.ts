import { useMutation, useQuery } from '@tanstack/react-query';
import type {
  BudgetRequest, BudgetResponse, GeodesicRequest, GeodesicResponse, NormalGravityRequest, NormalGravityResponse, RedshiftRequest, RedshiftResponse,
  TransformRequest, TransformResponse,
} from '../../shared/calc';
import { api } from '../lib/api-client';

export const calcKeys = {
  all: ['calc'] as const,
  normalGravity: (req: NormalGravityRequest) => [...calcKeys.all, 'normal-gravity', req] as const,
};

export const useRedshift = () => useMutation({ mutationFn: (body: RedshiftRequest) => api<RedshiftResponse>('/api/v1/calc/redshift', { body }) });
export const useNormalGravityCalc = () => useMutation({ mutationFn: (body: NormalGravityRequest) => api<NormalGravityResponse>('/api/v1/calc/normal-gravity', { body }) });
export const useGeodesic = () => useMutation({ mutationFn: (body: GeodesicRequest) => api<GeodesicResponse>('/api/v1/calc/geodesic', { body }) });
export const useBudget = () => useMutation({ mutationFn: (body: BudgetRequest) => api<BudgetResponse>('/api/v1/calc/budget', { body }) });
export const useTransform = () => useMutation({ mutationFn: (body: TransformRequest) => api<TransformResponse>('/api/v1/calc/transform', { body }) });

/** Mean normal gravity for a latitude and height (used by the planning view, which is computed in the browser). */
export const useNormalGravity = (req: NormalGravityRequest | null) =>
  useQuery({
    queryKey: calcKeys.normalGravity(req ?? { latitudeDeg: 0 }),
    queryFn: () => api<NormalGravityResponse>('/api/v1/calc/normal-gravity', { body: req }),
    enabled: req !== null,
    staleTime: Infinity,
  });
