import type { ReactNode } from 'react';
import { NavLink, Outlet } from 'react-router';
import { roleLabels } from '../../shared/auth';
import { useMe, useSignOut } from '../api/account';
import { dismiss, useNotices } from '../lib/notices';
import { navItems } from './nav';
import { SignInPage } from '../pages/sign-in-page';

const groupTitles = { work: 'Work', tools: 'Tools', admin: 'Administration' } as const;

/**
 * The signed-in frame. `children` replaces the routed page (the public verification page inside the frame);
 * `publicContent` is shown instead of the sign-in screen to someone not signed in.
 */
export function Layout({ children, publicContent }: { children?: ReactNode; publicContent?: ReactNode }) {
  const me = useMe();
  const signOut = useSignOut();
  const notices = useNotices();
  if (me.isPending) return <div className="p-10 text-ink-500">Loading…</div>;
  if (!me.data) return publicContent ?? <SignInPage />;
  const user = me.data;
  const items = navItems.filter((n) => n.roles.includes(user.role));
  // An entry whose path prefixes another entry's path (/, /admin) highlights only on its own page, so that
  // /admin/mailbox lights up "Test mailbox" alone; detail pages (/campaigns/<id>) still light up their list entry.
  const exact = (to: string) => to === '/' || navItems.some((o) => o.to !== to && o.to.startsWith(`${to}/`));
  return (
    <div className="flex min-h-screen">
      <nav className="flex w-60 shrink-0 flex-col bg-ink-800 text-ink-100" aria-label="Main">
        <div className="px-5 pb-4 pt-5">
          <div className="flex items-center gap-2 text-lg font-semibold text-paper-50">
            <img src="/favicon.svg" alt="" className="h-7 w-7" /> Chronolevel
          </div>
          <p className="mt-1 text-xs text-ink-300">clock-based levelling</p>
        </div>
        {(['work', 'tools', 'admin'] as const).map((g) => {
          const list = items.filter((i) => i.group === g);
          if (!list.length) return null;
          return (
            <div key={g} className="px-3 py-2">
              <p className="px-2 pb-1 text-[11px] uppercase tracking-wider text-ink-300">{groupTitles[g]}</p>
              {list.map((i) => (
                <NavLink key={i.to} to={i.to} end={exact(i.to)}
                  className={({ isActive }) => `block rounded-md px-2 py-1.5 text-sm no-underline ${isActive ? 'bg-ink-600 text-paper-50' : 'text-ink-100 hover:bg-ink-700'}`}>
                  {i.label}
                </NavLink>
              ))}
            </div>
          );
        })}
        <div className="mt-auto border-t border-ink-700 px-5 py-4 text-xs">
          <p className="font-medium text-paper-50" data-testid="whoami">{user.displayName}</p>
          <p className="text-ink-300">{roleLabels[user.role]}{user.institute ? ` · ${user.institute.code}` : ''}</p>
          <button className="mt-2 text-brass-300 underline" onClick={() => signOut.mutate()}>Sign out</button>
        </div>
      </nav>
      <main className="min-w-0 flex-1 px-8 py-6">
        <div className="mx-auto max-w-6xl space-y-5">
          {children ?? <Outlet />}
        </div>
        <p className="mx-auto mt-10 max-w-6xl text-xs text-ink-400">
          Demo data in this installation is an invented scenario: institutes, people, sites and measurements do not exist.
        </p>
      </main>
      <div className="fixed bottom-4 right-4 z-50 space-y-2" aria-live="polite">
        {notices.map((n) => (
          <div key={n.id} className={`max-w-md rounded-md px-4 py-3 text-sm shadow ${n.kind === 'error' ? 'bg-disagree-100 text-disagree-800' : 'bg-ink-100 text-ink-800'}`}>
            <span className="font-semibold">{n.kind === 'error' ? 'Problem: ' : ''}</span>{n.text}
            <button className="ml-3 text-xs underline" onClick={() => dismiss(n.id)}>dismiss</button>
          </div>
        ))}
      </div>
    </div>
  );
}
