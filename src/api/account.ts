import { queryOptions, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { AdminApiToken, ApiToken, CreateInstitute, Institute, Me, Role, SessionInfo, UpdateInstitute, User } from '../../shared/auth';
import type { Page } from '../../shared/http';
import { api, ApiError, setCsrfToken } from '../lib/api-client';

export const accountKeys = {
  all: ['account'] as const,
  me: () => [...accountKeys.all, 'me'] as const,
  tokens: () => [...accountKeys.all, 'tokens'] as const,
};
export const adminKeys = {
  all: ['admin'] as const,
  institutes: () => [...adminKeys.all, 'institutes'] as const,
  users: (params: object) => [...adminKeys.all, 'users', params] as const,
  mailbox: () => [...adminKeys.all, 'mailbox'] as const,
  tokens: (params: object) => [...adminKeys.all, 'tokens', params] as const,
  sessions: (params: object) => [...adminKeys.all, 'sessions', params] as const,
};

export const meQuery = queryOptions({
  queryKey: accountKeys.me(),
  queryFn: async (): Promise<Me | null> => {
    try {
      const me = await api<Me>('/api/v1/me');
      setCsrfToken(me.csrfToken);
      return me;
    } catch (e) {
      if (e instanceof ApiError && e.status === 401) return null;
      throw e;
    }
  },
  staleTime: 60_000,
});
export const useMe = () => useQuery(meQuery);

export function useSignOut() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: () => api<void>('/auth/logout', { method: 'POST' }),
    onSuccess: () => {
      setCsrfToken(null);
      qc.clear();
      window.location.assign('/');
    },
  });
}

export const useTokens = () => useQuery({ queryKey: accountKeys.tokens(), queryFn: () => api<Page<ApiToken>>('/api/v1/me/tokens').then((p) => p.items) });
export function useCreateToken() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (input: { name: string; expiresInDays: number }) => api<{ token: ApiToken; secret: string }>('/api/v1/me/tokens', { body: input }),
    onSuccess: () => qc.invalidateQueries({ queryKey: accountKeys.tokens() }),
  });
}
export function useRevokeToken() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (id: string) => api<void>(`/api/v1/me/tokens/${id}`, { method: 'DELETE' }),
    onSuccess: () => qc.invalidateQueries({ queryKey: accountKeys.tokens() }),
  });
}

export const useInstitutes = () => useQuery({ queryKey: adminKeys.institutes(), queryFn: () => api<Page<Institute>>('/api/v1/institutes').then((p) => p.items) });
export const useUsers = (params: { page: number; pageSize: number; sort?: string; order?: string; q?: string }) =>
  useQuery({
    queryKey: adminKeys.users(params),
    queryFn: () => api<Page<User>>(`/api/v1/users?${new URLSearchParams(Object.entries(params).filter(([, v]) => v !== undefined && v !== '').map(([k, v]) => [k, String(v)]))}`),
    placeholderData: (prev) => prev,
  });
export const useMailbox = () =>
  useQuery({
    queryKey: adminKeys.mailbox(),
    queryFn: () => api<Page<{ id: number; receivedAt: string; from: string; to: string[]; subject: string; text: string }>>('/api/v1/dev/mailbox').then((p) => p.items),
    refetchInterval: 5000,
  });

// Administration: institutes, people, everyone's sessions and tokens.
const query = (params: Record<string, string | number | boolean | undefined>) =>
  new URLSearchParams(Object.entries(params).filter(([, v]) => v !== undefined && v !== '').map(([k, v]) => [k, String(v)])).toString();

function useAdminMutation<A>(fn: (a: A) => Promise<unknown>) {
  const qc = useQueryClient();
  return useMutation({ mutationFn: fn, onSuccess: () => qc.invalidateQueries({ queryKey: adminKeys.all }) });
}
export const useCreateInstitute = () => useAdminMutation((body: CreateInstitute) => api<Institute>('/api/v1/institutes', { body }));
export const useUpdateInstitute = () => useAdminMutation(({ id, patch }: { id: string; patch: UpdateInstitute }) => api<Institute>(`/api/v1/institutes/${id}`, { method: 'PATCH', body: patch }));
export const useChangeRole = () => useAdminMutation(({ id, role }: { id: string; role: Role }) => api<User>(`/api/v1/users/${id}`, { method: 'PATCH', body: { role } }));
export const useSetActive = () => useAdminMutation(({ id, active }: { id: string; active: boolean }) => api<User>(`/api/v1/users/${id}/${active ? 'reactivate' : 'deactivate'}`, { method: 'POST' }));

export const useAllTokens = (params: { page: number; pageSize: number; userId?: string; active?: boolean }) =>
  useQuery({ queryKey: adminKeys.tokens(params), queryFn: () => api<Page<AdminApiToken>>(`/api/v1/admin/tokens?${query(params)}`), placeholderData: (prev) => prev });
export const useAllSessions = (params: { page: number; pageSize: number; userId?: string }) =>
  useQuery({ queryKey: adminKeys.sessions(params), queryFn: () => api<Page<SessionInfo>>(`/api/v1/admin/sessions?${query(params)}`), placeholderData: (prev) => prev });
export const useRevokeAnyToken = () => useAdminMutation((id: string) => api<void>(`/api/v1/admin/tokens/${id}`, { method: 'DELETE' }));
export const useEndSession = () => useAdminMutation((id: string) => api<void>(`/api/v1/admin/sessions/${id}`, { method: 'DELETE' }));
