import { keepPreviousData, queryOptions, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { Page } from '../../shared/http';
import type { JobProgress } from '../../shared/jobs';
import type {
  AdjustmentOptionsInput, AdjustmentRun, AdjustmentRunDetail, Benchmark, BenchmarkInput, HeightDatum, HeightDatumInput, LoopReport,
  NetworkMap, Reconciliation, Section, SectionInput, SectionUploadResult,
} from '../../shared/network';
import { api } from '../lib/api-client';

export type ListParams = { page: number; pageSize: number; sort?: string; order: 'asc' | 'desc'; q: string; datumId?: string };

export const networkKeys = {
  all: ['network'] as const,
  datums: () => [...networkKeys.all, 'datums'] as const,
  benchmarks: (p: ListParams) => [...networkKeys.all, 'benchmarks', p] as const,
  benchmark: (id: string) => [...networkKeys.all, 'benchmark', id] as const,
  sections: (p: ListParams) => [...networkKeys.all, 'sections', p] as const,
  loops: (datumId?: string) => [...networkKeys.all, 'loops', datumId ?? 'all'] as const,
  runs: (p: object) => [...networkKeys.all, 'runs', p] as const,
  run: (id: string) => [...networkKeys.all, 'run', id] as const,
  runProgress: (id: string) => [...networkKeys.all, 'run', id, 'progress'] as const,
  reconciliation: () => [...networkKeys.all, 'reconciliation'] as const,
  map: () => [...networkKeys.all, 'map'] as const,
};

function qs(p: Record<string, unknown>) {
  const s = new URLSearchParams();
  for (const [k, v] of Object.entries(p)) if (v !== undefined && v !== '') s.set(k, String(v));
  return s.toString();
}

export const datumsQuery = queryOptions({ queryKey: networkKeys.datums(), queryFn: () => api<Page<HeightDatum>>('/api/v1/network/datums').then((p) => p.items) });
export const useDatums = () => useQuery(datumsQuery);
export const useBenchmarks = (p: ListParams) =>
  useQuery({ queryKey: networkKeys.benchmarks(p), queryFn: () => api<Page<Benchmark>>(`/api/v1/network/benchmarks?${qs(p)}`), placeholderData: keepPreviousData });
export const useBenchmark = (id: string) => useQuery({ queryKey: networkKeys.benchmark(id), queryFn: () => api<Benchmark>(`/api/v1/network/benchmarks/${id}`) });
export const useSections = (p: ListParams) =>
  useQuery({ queryKey: networkKeys.sections(p), queryFn: () => api<Page<Section>>(`/api/v1/network/sections?${qs(p)}`), placeholderData: keepPreviousData });
export const useLoops = (datumId?: string) =>
  useQuery({ queryKey: networkKeys.loops(datumId), queryFn: () => api<LoopReport>(`/api/v1/network/loops?${qs({ datumId })}`) });
export const useRuns = (p: { page: number; pageSize: number }) =>
  useQuery({
    queryKey: networkKeys.runs(p), queryFn: () => api<Page<AdjustmentRun>>(`/api/v1/network/runs?${qs(p)}`),
    refetchInterval: (q) => (q.state.data?.items.some((r) => r.state === 'queued' || r.state === 'running') ? 1000 : false),
  });
/** The run with its results; while it is open the page polls the light progress route and refetches this once it ends. */
export const useRun = (id: string) =>
  useQuery({
    queryKey: networkKeys.run(id), queryFn: () => api<AdjustmentRunDetail>(`/api/v1/network/runs/${id}`),
    refetchInterval: (q) => (q.state.data && (q.state.data.state === 'done' || q.state.data.state === 'failed') ? false : 5000),
  });
/** The run's durable progress (stage, fraction, written by the worker about every 250 ms), polled every 500 ms while open. */
export const useRunProgress = (id: string, open: boolean) => {
  const qc = useQueryClient();
  return useQuery({
    queryKey: networkKeys.runProgress(id), enabled: open,
    queryFn: async () => {
      const p = await api<JobProgress>(`/api/v1/network/runs/${id}/progress`);
      if (p.state === 'done' || p.state === 'failed') await qc.invalidateQueries({ queryKey: networkKeys.run(id), exact: true });
      return p;
    },
    refetchInterval: (q) => (q.state.data && (q.state.data.state === 'done' || q.state.data.state === 'failed') ? false : 500),
  });
};
export const useReconciliation = () => useQuery({ queryKey: networkKeys.reconciliation(), queryFn: () => api<Reconciliation>('/api/v1/network/reconciliation') });
export const useNetworkMap = () => useQuery({ queryKey: networkKeys.map(), queryFn: () => api<NetworkMap>('/api/v1/network/map') });

function useNetworkMutation<TIn, TOut>(fn: (input: TIn) => Promise<TOut>) {
  const qc = useQueryClient();
  return useMutation({ mutationFn: fn, onSuccess: () => qc.invalidateQueries({ queryKey: networkKeys.all }) });
}
export const useCreateDatum = () => useNetworkMutation((d: HeightDatumInput) => api<HeightDatum>('/api/v1/network/datums', { body: d }));
export const useSaveBenchmark = () =>
  useNetworkMutation(({ id, body }: { id?: string; body: BenchmarkInput }) =>
    api<Benchmark>(id ? `/api/v1/network/benchmarks/${id}` : '/api/v1/network/benchmarks', { method: id ? 'PUT' : 'POST', body }));
export const useSaveSection = () =>
  useNetworkMutation(({ id, body }: { id?: string; body: SectionInput }) =>
    api<Section>(id ? `/api/v1/network/sections/${id}` : '/api/v1/network/sections', { method: id ? 'PUT' : 'POST', body }));
export const useDeleteSection = () => useNetworkMutation((id: string) => api<void>(`/api/v1/network/sections/${id}`, { method: 'DELETE' }));
export const useUploadSections = () =>
  useNetworkMutation(({ file, preview }: { file: File; preview: boolean }) => {
    const fd = new FormData();
    fd.append('file', file);
    return api<SectionUploadResult>(`/api/v1/network/sections/upload?preview=${preview}`, { formData: fd });
  });
export const useStartRun = () => useNetworkMutation((o: AdjustmentOptionsInput) => api<AdjustmentRun>('/api/v1/network/runs', { body: o }));
