import { Link } from 'react-router';
import { EmptyState } from '../components/ui';

export function NotFoundPage() {
  return (
    <EmptyState title="This page does not exist">
      <Link to="/">Back to the overview</Link>
    </EmptyState>
  );
}
