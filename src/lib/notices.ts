import { useSyncExternalStore } from 'react';

export type Notice = { id: number; kind: 'error' | 'info'; text: string };
let notices: Notice[] = [];
let next = 1;
const listeners = new Set<() => void>();
const emit = () => listeners.forEach((l) => l());

export function notify(n: Omit<Notice, 'id'>) {
  const id = next++;
  notices = [...notices, { ...n, id }].slice(-4);
  emit();
  setTimeout(() => dismiss(id), 9000);
}
export function dismiss(id: number) {
  notices = notices.filter((n) => n.id !== id);
  emit();
}
export function useNotices(): Notice[] {
  return useSyncExternalStore(
    (l) => {
      listeners.add(l);
      return () => listeners.delete(l);
    },
    () => notices,
  );
}
