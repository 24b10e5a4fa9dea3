import { keepPreviousData, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { Page } from '../../shared/http';
import type {
  BudgetVersion, Clock, CreateClock, CreateLink, CreateSite, CrsEntry, Link, NewBudgetVersion, QuasigeoidGrid, ReferenceFrequency,
  ReferenceFrequencyInput, Site, UpdateSite, UploadQuasigeoidGrid,
} from '../../shared/registry';
import type { z } from 'zod';
import type { updateClockSchema, updateLinkSchema } from '../../shared/registry';
import { api } from '../lib/api-client';
import type { ClockDeployments, CreateDeployment, Deployment, SiteClocks, UpdateDeployment } from '../../shared/deployments';

type UpdateClock = z.input<typeof updateClockSchema>;
type UpdateLink = z.input<typeof updateLinkSchema>;

export type RegistryListParams = { page: number; pageSize: number; sort?: string; order: 'asc' | 'desc'; q: string; instituteId?: string; siteId?: string };

export const registryKeys = {
  all: ['registry'] as const,
  crs: () => [...registryKeys.all, 'crs'] as const,
  sites: (p: RegistryListParams) => [...registryKeys.all, 'sites', p] as const,
  site: (id: string) => [...registryKeys.all, 'site', id] as const,
  grids: () => [...registryKeys.all, 'grids'] as const,
  clocks: (p: RegistryListParams) => [...registryKeys.all, 'clocks', p] as const,
  clock: (id: string) => [...registryKeys.all, 'clock', id] as const,
  budgets: (clockId: string) => [...registryKeys.all, 'budgets', clockId] as const,
  references: () => [...registryKeys.all, 'references'] as const,
  links: (p: RegistryListParams) => [...registryKeys.all, 'links', p] as const,
  link: (id: string) => [...registryKeys.all, 'link', id] as const,
  deployments: (clockId: string) => [...registryKeys.all, 'deployments', clockId] as const,
  siteClocks: (siteId: string) => [...registryKeys.all, 'site-clocks', siteId] as const,
};

export function queryString(p: Record<string, unknown>) {
  const s = new URLSearchParams();
  for (const [k, v] of Object.entries(p)) if (v !== undefined && v !== '' && v !== null) s.set(k, String(v));
  return s.toString();
}

export const useCrsList = () => useQuery({ queryKey: registryKeys.crs(), queryFn: () => api<Page<CrsEntry>>('/api/v1/crs').then((p) => p.items), staleTime: Infinity });
export const useSites = (p: RegistryListParams) =>
  useQuery({ queryKey: registryKeys.sites(p), queryFn: () => api<Page<Site>>(`/api/v1/sites?${queryString(p)}`), placeholderData: keepPreviousData });
export const useSite = (id: string) => useQuery({ queryKey: registryKeys.site(id), queryFn: () => api<Site>(`/api/v1/sites/${id}`) });
export const useGrids = () => useQuery({ queryKey: registryKeys.grids(), queryFn: () => api<Page<QuasigeoidGrid>>('/api/v1/quasigeoid-grids').then((p) => p.items) });
export const useClocks = (p: RegistryListParams) =>
  useQuery({ queryKey: registryKeys.clocks(p), queryFn: () => api<Page<Clock>>(`/api/v1/clocks?${queryString(p)}`), placeholderData: keepPreviousData });
export const useClock = (id: string) => useQuery({ queryKey: registryKeys.clock(id), queryFn: () => api<Clock>(`/api/v1/clocks/${id}`) });
export const useBudgetVersions = (clockId: string) =>
  useQuery({ queryKey: registryKeys.budgets(clockId), queryFn: () => api<Page<BudgetVersion>>(`/api/v1/clocks/${clockId}/budget-versions`).then((p) => p.items) });
export const useReferences = () => useQuery({ queryKey: registryKeys.references(), queryFn: () => api<Page<ReferenceFrequency>>('/api/v1/reference-frequencies').then((p) => p.items) });
export const useLinks = (p: RegistryListParams) =>
  useQuery({ queryKey: registryKeys.links(p), queryFn: () => api<Page<Link>>(`/api/v1/links?${queryString(p)}`), placeholderData: keepPreviousData });
export const useLink = (id: string) => useQuery({ queryKey: registryKeys.link(id), queryFn: () => api<Link>(`/api/v1/links/${id}`) });

function useRegistryMutation<TIn, TOut>(fn: (input: TIn) => Promise<TOut>) {
  const qc = useQueryClient();
  return useMutation({ mutationFn: fn, onSuccess: () => qc.invalidateQueries({ queryKey: registryKeys.all }) });
}
export const useCreateSite = () => useRegistryMutation((body: CreateSite) => api<Site>('/api/v1/sites', { body }));
export const useUpdateSite = () => useRegistryMutation(({ id, body }: { id: string; body: UpdateSite }) => api<Site>(`/api/v1/sites/${id}`, { method: 'PATCH', body }));
export const useUploadGrid = () => useRegistryMutation((body: UploadQuasigeoidGrid) => api<QuasigeoidGrid>('/api/v1/quasigeoid-grids', { body }));
export const useCreateClock = () => useRegistryMutation((body: CreateClock) => api<Clock>('/api/v1/clocks', { body }));
export const useAddBudgetVersion = () =>
  useRegistryMutation(({ clockId, body }: { clockId: string; body: NewBudgetVersion }) => api<BudgetVersion>(`/api/v1/clocks/${clockId}/budget-versions`, { body }));
export const useUpdateClock = () =>
  useRegistryMutation(({ id, body }: { id: string; body: UpdateClock }) => api<Clock>(`/api/v1/clocks/${id}`, { method: 'PATCH', body }));
export const useUpdateLink = () =>
  useRegistryMutation(({ id, body }: { id: string; body: UpdateLink }) => api<Link>(`/api/v1/links/${id}`, { method: 'PATCH', body }));
export const useCreateLink = () => useRegistryMutation((body: CreateLink) => api<Link>('/api/v1/links', { body }));
export const useCreateReference = () => useRegistryMutation((body: ReferenceFrequencyInput) => api<ReferenceFrequency>('/api/v1/reference-frequencies', { body }));
export const useUpdateReference = () =>
  useRegistryMutation(({ id, body }: { id: string; body: Partial<ReferenceFrequencyInput> }) => api<ReferenceFrequency>(`/api/v1/reference-frequencies/${id}`, { method: 'PATCH', body }));
export const useDeployments = (clockId: string) =>
  useQuery({ queryKey: registryKeys.deployments(clockId), queryFn: () => api<ClockDeployments>(`/api/v1/clocks/${clockId}/deployments`) });
export const useSiteClocks = (siteId: string) => useQuery({ queryKey: registryKeys.siteClocks(siteId), queryFn: async () => (await api<Page<SiteClocks[number]>>(`/api/v1/sites/${siteId}/clocks`)).items });
export const useAddDeployment = () =>
  useRegistryMutation(({ clockId, body }: { clockId: string; body: CreateDeployment }) => api<Deployment>(`/api/v1/clocks/${clockId}/deployments`, { body }));
export const useUpdateDeployment = () =>
  useRegistryMutation(({ clockId, id, body }: { clockId: string; id: string; body: UpdateDeployment }) => api<Deployment>(`/api/v1/clocks/${clockId}/deployments/${id}`, { method: 'PATCH', body }));
export const useRemoveDeployment = () =>
  useRegistryMutation(({ clockId, id }: { clockId: string; id: string }) => api<{ deleted: true }>(`/api/v1/clocks/${clockId}/deployments/${id}`, { method: 'DELETE' }));
