import { Link } from 'react-router';
import { roleLabels } from '../../shared/auth';
import { useMe } from '../api/account';
import { EmptyState, Panel } from '../components/ui';
import { homeCards } from '../app/home-cards';

export function HomePage() {
  const { data: me } = useMe();
  if (!me) return null;
  const cards = homeCards.filter((c) => c.roles.includes(me.role));
  return (
    <>
      <header>
        <p className="text-sm text-ink-500">{roleLabels[me.role]}{me.institute ? ` · ${me.institute.name}` : ''}</p>
        <h1 data-testid="home-title">Welcome, {me.displayName}</h1>
      </header>
      {cards.length === 0 ? (
        <EmptyState title="Nothing to do yet">Your work will appear here as campaigns, networks and certificates are added.</EmptyState>
      ) : (
        <div className="grid gap-4 md:grid-cols-2">
          {cards.map((c) => (
            <Panel key={c.to} title={c.title}>
              <p className="text-sm text-ink-600">{c.text}</p>
              <Link to={c.to} className="mt-3 inline-block text-sm">{c.action} →</Link>
            </Panel>
          ))}
        </div>
      )}

    </>
  );
}
