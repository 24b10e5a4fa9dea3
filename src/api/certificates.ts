import { keepPreviousData, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { AuditEvent } from '../../shared/auth';
import type { CampaignSummary } from '../../shared/campaigns';
import type { CertificateDetail, CertificateListQuery, CertificateSummary, VerificationResult } from '../../shared/certificate-registry';
import type { AnyCertificateSnapshot } from '../../shared/certificates';
import { JOB_POLL_SECONDS, type CertificateRequestAccepted, type CertificateRequestProgress } from '../../shared/jobs';
import type { TrustAnchorInfo } from '../../shared/certificate-signature';
import type { Page, Problem } from '../../shared/http';
import { api, ApiError } from '../lib/api-client';

export const certificateKeys = {
  all: ['certificates'] as const,
  list: (params: object) => [...certificateKeys.all, 'list', params] as const,
  detail: (number: string) => [...certificateKeys.all, 'detail', number] as const,
  snapshot: (number: string) => [...certificateKeys.all, 'snapshot', number] as const,
  forCampaign: (campaignId: string) => [...certificateKeys.all, 'campaign', campaignId] as const,
  forChain: (chainId: string) => [...certificateKeys.all, 'chain', chainId] as const,
  audit: (campaignId: string) => [...certificateKeys.all, 'audit', campaignId] as const,
  awaiting: () => [...certificateKeys.all, 'awaiting'] as const,
};

function queryString(params: object): string {
  return new URLSearchParams(
    Object.entries(params)
      .filter(([, v]) => v !== undefined && v !== null && v !== '')
      .map(([k, v]) => [k, String(v)]),
  ).toString();
}

export type CertificateListParams = Partial<CertificateListQuery> & { page: number; pageSize: number };

export const useCertificates = (params: CertificateListParams) =>
  useQuery({
    queryKey: certificateKeys.list(params),
    queryFn: () => api<Page<CertificateSummary>>(`/api/v1/certificates?${queryString(params)}`),
    placeholderData: keepPreviousData,
  });

export const useCampaignCertificates = (campaignId: string) =>
  useQuery({
    queryKey: certificateKeys.forCampaign(campaignId),
    queryFn: () => api<Page<CertificateSummary>>(`/api/v1/certificates?${queryString({ campaignId, page: 1, pageSize: 50, sort: 'issuedAt', order: 'asc' })}`),
  });

export const useChainCertificates = (chainId: string) =>
  useQuery({
    queryKey: certificateKeys.forChain(chainId),
    queryFn: () => api<Page<CertificateSummary>>(`/api/v1/certificates?${queryString({ chainId, kind: 'chain', page: 1, pageSize: 50, sort: 'issuedAt', order: 'asc' })}`),
  });

/** Accepted campaigns: the ones a coordinator may certify (kept under the certificate keys so issuing refreshes it). */
export const useCampaignsAwaitingCertificate = (enabled: boolean) =>
  useQuery({
    queryKey: certificateKeys.awaiting(),
    enabled,
    queryFn: () => api<Page<CampaignSummary>>(`/api/v1/campaigns?${queryString({ state: 'accepted', page: 1, pageSize: 100, sort: 'periodStart', order: 'asc' })}`),
  });

export const useCertificate = (number: string) =>
  useQuery({ queryKey: certificateKeys.detail(number), queryFn: () => api<CertificateDetail>(`/api/v1/certificates/${encodeURIComponent(number)}`) });

export const useCertificateSnapshot = (number: string, enabled: boolean) =>
  useQuery({
    queryKey: certificateKeys.snapshot(number),
    queryFn: () => api<AnyCertificateSnapshot>(`/api/v1/certificates/${encodeURIComponent(number)}/snapshot`),
    enabled,
  });

export const certificatePdfUrl = (number: string) => `/api/v1/certificates/${encodeURIComponent(number)}/pdf`;
export const certificateSnapshotUrl = (number: string) => `/api/v1/certificates/${encodeURIComponent(number)}/snapshot`;

/** Every event of the campaign, its uploads and its certificates, oldest first, numbered 1…n by the server. */
export const useCampaignAuditTrail = (campaignId: string) =>
  useQuery({
    queryKey: certificateKeys.audit(campaignId),
    queryFn: () => api<Page<AuditEvent & { seq: number }>>(`/api/v1/campaigns/${campaignId}/audit-trail`).then((p) => p.items),
  });

function useCertificateMutation<V, R>(fn: (v: V) => Promise<R>) {
  const qc = useQueryClient();
  return useMutation({ mutationFn: fn, onSuccess: () => qc.invalidateQueries({ queryKey: certificateKeys.all }) });
}

/** Issue and reissue answer 202 with the request; a worker renders, time-stamps and signs (useCertificateRequestProgress). */
export const useIssueCertificate = () =>
  useCertificateMutation((v: { campaignId: string; comment: string; justification?: string }) =>
    api<CertificateRequestAccepted>(`/api/v1/campaigns/${v.campaignId}/certificates`, { method: 'POST', body: { comment: v.comment, justification: v.justification } }),
  );
export const useIssueChainCertificate = () =>
  useCertificateMutation((v: { chainId: string; comment: string; justification?: string }) =>
    api<CertificateRequestAccepted>(`/api/v1/chains/${v.chainId}/certificates`, { method: 'POST', body: { comment: v.comment, justification: v.justification } }),
  );
export const useReissueCertificate = () =>
  useCertificateMutation((v: { number: string; reason: string }) =>
    api<CertificateRequestAccepted>(`/api/v1/certificates/${encodeURIComponent(v.number)}/reissue`, { body: { reason: v.reason } }),
  );

/**
 * Polls a certificate request's progress every second until it is done or failed. The caller refreshes the
 * certificate lists when its dialog closes (refreshing earlier would unmount the dialog that shows the link).
 */
export function useCertificateRequestProgress(progressUrl: string | null) {
  return useQuery({
    queryKey: ['certificate-request', progressUrl],
    enabled: progressUrl !== null,
    queryFn: () => api<CertificateRequestProgress>(progressUrl!),
    refetchInterval: (q) => (q.state.data && (q.state.data.state === 'done' || q.state.data.state === 'failed') ? false : JOB_POLL_SECONDS * 1000),
  });
}
export const useRevokeCertificate = () =>
  useCertificateMutation((v: { number: string; reason: string }) =>
    api<CertificateSummary>(`/api/v1/certificates/${encodeURIComponent(v.number)}/revoke`, { body: { reason: v.reason } }),
  );

// Verification is public: sent without cookies, so a signed-in visitor and a stranger get the same answer
// and no session (or CSRF token) is involved.
async function publicJson<T>(res: Response): Promise<T> {
  if (res.ok) return res.json() as Promise<T>;
  const type = res.headers.get('content-type') ?? '';
  const problem: Problem = type.includes('json')
    ? await res.json()
    : { type: 'about:blank', title: res.statusText, status: res.status, detail: await res.text(), code: 'http' };
  throw new ApiError(res.status, problem);
}

export const useVerifyFile = () =>
  useMutation({
    mutationFn: async (file: File) => {
      const form = new FormData();
      form.append('file', file);
      return publicJson<VerificationResult>(await fetch('/api/v1/certificates/verify', { method: 'POST', body: form, credentials: 'omit', headers: { accept: 'application/json' } }));
    },
  });

export const useVerifyNumber = () =>
  useMutation({
    mutationFn: async (v: { number: string; sha256: string }) =>
      publicJson<VerificationResult>(await fetch(`/api/v1/certificates/verify?${queryString(v)}`, { credentials: 'omit', headers: { accept: 'application/json' } })),
  });

/** The institute root CA to install in a PDF reader, with its fingerprint (public). */
export const useTrustAnchor = () =>
  useQuery({
    queryKey: ['pki', 'trust-anchor'],
    queryFn: async () => publicJson<TrustAnchorInfo>(await fetch('/api/v1/pki/trust-anchor', { credentials: 'omit', headers: { accept: 'application/json' } })),
    staleTime: 3_600_000,
  });
