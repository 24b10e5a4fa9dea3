import type { ReactNode } from 'react';
import type { RouteObject } from 'react-router';
import { useParams } from 'react-router';
import { NotFoundPage } from '../pages/not-found-page';

// Record pages are addressed by UUID; anything else under their path (/sites/new, /campaigns/abc) is a page that
// does not exist, shown as such before any request is made (no validation error, no notices).

const UUID = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i;

function RequireUuid({ children }: { children: ReactNode }) {
  const { id = '' } = useParams();
  return UUID.test(id) ? children : <NotFoundPage />;
}

/** Wraps every route with an `:id` segment in the UUID check. */
export function guardIdParams(route: RouteObject): RouteObject {
  if (!route.path?.split('/').includes(':id')) return route;
  return { ...route, element: <RequireUuid>{route.element}</RequireUuid> };
}
