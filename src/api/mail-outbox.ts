import { useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { MailOutboxItem, MailOutboxPage, MailState } from '../../shared/mail-outbox';
import { api } from '../lib/api-client';

export const mailOutboxKeys = {
  all: ['mail-outbox'] as const,
  list: (state: MailState, page: number) => [...mailOutboxKeys.all, state, page] as const,
};

export const useMailOutbox = (state: MailState, page: number) =>
  useQuery({
    queryKey: mailOutboxKeys.list(state, page),
    queryFn: () => api<MailOutboxPage>(`/api/v1/admin/mail-outbox?state=${state}&page=${page}&pageSize=20`),
    refetchInterval: 30_000,
  });

export function useRetryMail() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (id: string) => api<MailOutboxItem>(`/api/v1/admin/mail-outbox/${id}/retry`, { body: {} }),
    onSuccess: () => qc.invalidateQueries({ queryKey: mailOutboxKeys.all }),
  });
}
