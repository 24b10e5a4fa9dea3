import { Link, useLocation } from 'react-router';
import { EmptyState } from '../components/ui';

export function NotFoundPage() {
  const { pathname } = useLocation();
  return (
    <div data-testid="not-found">
      <h1 className="mb-4">Page not found</h1>
      <EmptyState title={`There is no page at ${pathname}`}>
        The address may be mistyped, or the record it pointed to is not one you can open. <Link to="/">Back to the overview</Link>
      </EmptyState>
    </div>
  );
}
