import { keepPreviousData, useMutation, useQuery, useQueryClient, type QueryClient } from '@tanstack/react-query';
import type { Page, Problem } from '../../shared/http';
import type { RatioSeries, SeriesPlot, UploadPreview, UploadProgress } from '../../shared/uploads';
import { api, ApiError } from '../lib/api-client';
import { accountKeys } from './account';
import type { Me } from '../../shared/auth';

export const uploadKeys = {
  all: ['uploads'] as const,
  list: (campaignId: string) => [...uploadKeys.all, 'list', campaignId] as const,
  plot: (seriesId: string, points: number, range: { fromMjd: number; toMjd: number } | null) => [...uploadKeys.all, 'plot', seriesId, points, range] as const,
};

export const useCampaignUploads = (campaignId: string) =>
  useQuery({ queryKey: uploadKeys.list(campaignId), queryFn: () => api<Page<RatioSeries>>(`/api/v1/campaigns/${campaignId}/uploads`).then((p) => p.items) });

/** The server's decimation of one series, for the whole span or for the range zoomed into (refetched per range). */
export const useSeriesPlot = (seriesId: string | null, points = 1500, range: { fromMjd: number; toMjd: number } | null = null) =>
  useQuery({
    queryKey: uploadKeys.plot(seriesId ?? '', points, range),
    queryFn: () => api<SeriesPlot>(`/api/v1/uploads/${seriesId}/series?points=${points}${range ? `&fromMjd=${range.fromMjd}&toMjd=${range.toMjd}` : ''}`),
    enabled: !!seriesId,
    staleTime: Infinity,
    placeholderData: keepPreviousData,
  });

/** The preview reads only the start of the file: the client sends just the first 64 KiB. */
export function usePreviewUpload(campaignId: string) {
  return useMutation({
    mutationFn: (file: File) => {
      const form = new FormData();
      form.append('file', file.slice(0, 64 * 1024), file.name);
      return api<UploadPreview>(`/api/v1/campaigns/${campaignId}/uploads/preview`, { formData: form });
    },
  });
}

/** `failed`: the server answered with a problem; `checkedWhole` says whether it had read the whole file by then (400, 409). */
export type UploadStage = { stage: 'sending' | 'processing' | 'storing' | 'done' | 'failed'; sentFraction: number; rowsProcessed: number; bytesRead: number; bytesTotal: number; checkedWhole?: boolean };

function csrfFrom(qc: QueryClient): string | null {
  return qc.getQueryData<Me | null>(accountKeys.me())?.csrfToken ?? null;
}

/**
 * Sends the file with XMLHttpRequest (the browser reports bytes sent) and, in parallel, polls the server's progress
 * for the same client-chosen upload id (rows processed, bytes read), until the upload request answers.
 */
export function sendUpload(qc: QueryClient, campaignId: string, file: File, mapping: Record<string, string>, onStage: (s: UploadStage) => void): Promise<RatioSeries> {
  const uploadId = crypto.randomUUID();
  const form = new FormData();
  for (const [k, v] of Object.entries(mapping)) form.append(k, v);
  form.append('file', file, file.name);
  const state: UploadStage = { stage: 'sending', sentFraction: 0, rowsProcessed: 0, bytesRead: 0, bytesTotal: file.size };
  const emit = () => onStage({ ...state });
  let polling = true;
  const poll = async () => {
    while (polling) {
      await new Promise((r) => setTimeout(r, 400));
      if (!polling) break;
      try {
        const p = await api<UploadProgress>(`/api/v1/uploads/${uploadId}/progress`);
        state.rowsProcessed = p.rowsProcessed;
        state.bytesRead = Math.min(p.bytesRead, file.size);
        if (p.phase === 'storing') state.stage = 'storing';
        emit();
      } catch {
        // not started yet on the server, or already finished: keep the last figures
      }
    }
  };
  return new Promise<RatioSeries>((resolve, reject) => {
    const xhr = new XMLHttpRequest();
    xhr.open('POST', `/api/v1/campaigns/${campaignId}/uploads?uploadId=${uploadId}`);
    xhr.setRequestHeader('accept', 'application/json');
    const csrf = csrfFrom(qc);
    if (csrf) xhr.setRequestHeader('x-csrf-token', csrf);
    xhr.upload.onprogress = (e) => {
      if (e.lengthComputable) state.sentFraction = e.loaded / e.total;
      if (state.sentFraction >= 1 && state.stage === 'sending') state.stage = 'processing';
      emit();
    };
    xhr.upload.onload = () => {
      state.sentFraction = 1;
      if (state.stage === 'sending') state.stage = 'processing';
      emit();
    };
    xhr.onload = () => {
      polling = false;
      let body: unknown;
      try {
        body = JSON.parse(xhr.responseText);
      } catch {
        body = null;
      }
      if (xhr.status === 201) {
        state.stage = 'done';
        state.bytesRead = file.size;
        state.rowsProcessed = (body as RatioSeries).rowCount;
        emit();
        resolve(body as RatioSeries);
      } else {
        const problem = (body as Problem | null) ?? { type: 'about:blank', title: xhr.statusText, status: xhr.status, detail: xhr.responseText.slice(0, 300), code: 'http' };
        state.stage = 'failed';
        // A refused file (bad content, or a repeat) was read to its end before the answer came.
        state.checkedWhole = xhr.status === 400 || xhr.status === 409;
        if (state.checkedWhole) state.bytesRead = file.size;
        emit();
        reject(new ApiError(xhr.status, problem));
      }
    };
    xhr.onerror = () => {
      polling = false;
      state.stage = 'failed';
      emit();
      reject(new Error('The connection failed during the upload.'));
    };
    xhr.send(form);
    void poll();
  });
}

export function useSendUpload(campaignId: string) {
  const qc = useQueryClient();
  return {
    send: async (file: File, mapping: Record<string, string>, onStage: (s: UploadStage) => void) => {
      const s = await sendUpload(qc, campaignId, file, mapping, onStage);
      await qc.invalidateQueries({ queryKey: uploadKeys.list(campaignId) });
      return s;
    },
  };
}
