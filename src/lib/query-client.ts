import { MutationCache, QueryCache, QueryClient } from '@tanstack/react-query';
import { ApiError } from './api-client';
import { notify } from './notices';

// Sign-in redirects and error notices happen here once, not in every component.
function onError(error: unknown) {
  if (error instanceof ApiError && error.status === 401) return; // the layout shows the sign-in screen
  notify({ kind: 'error', text: error instanceof ApiError ? error.problem.detail : String(error) });
}

export const queryClient = new QueryClient({
  queryCache: new QueryCache({ onError }),
  mutationCache: new MutationCache({ onError }),
  defaultOptions: {
    queries: { retry: (count, e) => !(e instanceof ApiError && e.status < 500) && count < 2, staleTime: 15_000 },
  },
});
